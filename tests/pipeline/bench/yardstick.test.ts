/**
 * The solver bench's C yardstick plumbing: where the binary comes from, how its one output line is
 * read (the format documented in ../shared/perf-ref/README.md: a line ending in
 * `mcells=<million cell updates per second>`), and the median of paired ratios.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { locateYardstick, runYardstick } from "../../../pipeline/bench/yardstick";
import { spread } from "../../../pipeline/bench/solver";

let tmp: string;
beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-yardstick-"));
});
afterAll(() => fs.rmSync(tmp, { recursive: true, force: true }));

describe("C yardstick", () => {
  it("says why there is no ratio when the given path is not an executable", () => {
    const a = locateYardstick(path.join(tmp, "missing"));
    expect(a).toEqual({ found: false, reason: `--yardstick ${path.join(tmp, "missing")}: no executable file there` });
    const b = locateYardstick(undefined, { TRACEWRIGHT_YARDSTICK: path.join(tmp, "missing") });
    expect(b.found).toBe(false);
    if (!b.found) expect(b.reason).toMatch(/^TRACEWRIGHT_YARDSTICK .*missing: no executable file there$/);
  });

  it("takes the option before the environment, and reads the rate the yardstick prints", async () => {
    const fake = path.join(tmp, "fake-ref");
    // Prints the yardstick's line for its arguments NX NZ NT WARMUP, with a fixed rate.
    fs.writeFileSync(fake, '#!/bin/sh\necho "impl=c nx=$1 nz=$2 nt=$3 warm=$4 sec=0.5 mcells=123.50 vz_sum=0"\n', { mode: 0o755 });
    const other = path.join(tmp, "other");
    fs.writeFileSync(other, "#!/bin/sh\nexit 0\n", { mode: 0o755 });
    const where = locateYardstick(fake, { TRACEWRIGHT_YARDSTICK: other });
    expect(where).toEqual({ found: true, binary: fake, origin: "option" });
    expect(locateYardstick(undefined, { TRACEWRIGHT_YARDSTICK: other })).toEqual({ found: true, binary: other, origin: "environment" });
    const run = await runYardstick(fake, 1000, 400, 300);
    expect(run.mcells).toBe(123.5);
    // seconds = cells × steps / rate
    expect(run.seconds).toBeCloseTo((1000 * 400 * 300) / 123.5e6, 12);
    await expect(runYardstick(other, 10, 10, 10)).rejects.toThrow(/printed no mcells=<rate>/);
  });

  it("summarises paired ratios by their median, minimum and maximum", () => {
    // Median of an odd count is the middle value (common practice).
    expect(spread([0.9, 0.7, 0.8, 1.2, 0.75])).toEqual({ median: 0.8, min: 0.7, max: 1.2 });
    expect(() => spread([])).toThrow(RangeError);
  });
});
