/**
 * How often the run page asks for its run (our own rule, DEVELOPERS.md "Stopping a run"): every
 * second while it runs, quicker while a stop is pending so that the stop shows at once, never
 * once it ended.
 */
import { describe, expect, it } from "vitest";
import { LIVE_POLL_MS, runPollInterval, STOPPING_POLL_MS } from "../../app/lib/queries";

describe("runPollInterval", () => {
  it("polls quicker while a stop is pending than while the run simply runs", () => {
    expect(runPollInterval({ status: "running", cancelRequested: false })).toBe(LIVE_POLL_MS);
    expect(runPollInterval({ status: "queued" })).toBe(LIVE_POLL_MS);
    expect(runPollInterval({ status: "running", cancelRequested: true })).toBe(STOPPING_POLL_MS);
    expect(STOPPING_POLL_MS).toBeLessThan(LIVE_POLL_MS);
  });

  it("stops polling once the run ended, stopped or not", () => {
    for (const status of ["cancelled", "succeeded", "failed", "interrupted"]) {
      expect(runPollInterval({ status, cancelRequested: true })).toBe(false);
    }
    expect(runPollInterval(undefined)).toBe(false);
  });
});
