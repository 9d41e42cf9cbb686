/**
 * Cancel arriving in the middle of a shot that runs inside a worker: the solver's shared cancel
 * flag, checked every 64 steps, stops it within 64 steps; the error is a cancellation; the pool
 * runs the next task.
 */
import { afterAll, describe, expect, it } from "vitest";
import { buildModel } from "../../../../pipeline/kernels/fd/model-grid";
import { modelShots, type GatherTemplate } from "../../../../pipeline/kernels/fd/model-shots";
import { createWorkerPool } from "../../../../pipeline/workers/pool";
import type { TraceHeader } from "../../../../pipeline/types";

const pool = createWorkerPool(1);
afterAll(() => pool.close());

function template(id: string, sampleCount: number): GatherTemplate {
  const traces: TraceHeader[] = Array.from({ length: 8 }, (_, c) => ({
    sourceFile: id, channel: c + 1, sourcePoint: 1, blow: 0, sourceX: 2, sourceZ: 0,
    receiverX: 4 + 2 * c, receiverZ: 0, offset: 2 + 2 * c, stackCount: 1, component: "z", dead: false,
  }));
  return { id, sampleIntervalS: 0.0005, sampleCount, startTimeS: 0, traces };
}

/** Resolves when `counter[0]` reaches `atLeast` (polled between event-loop turns, no fixed sleep). */
async function untilCounter(counter: Int32Array, atLeast: number): Promise<void> {
  while (Atomics.load(counter, 0) < atLeast) await new Promise((r) => setImmediate(r));
}

describe("modelShots cancel inside a worker", () => {
  it("stops a running shot within 64 steps with a cancellation, and the pool stays usable", async () => {
    const model = buildModel({ originX: 0, originZ: 0, spacingM: 0.5, nx: 60, nz: 30 }, [{ topM: 0, vp: 800, vs: 250, rho: 1900 }]);
    const options = { mode: "psv" as const, sourceKind: "force-z" as const, wavelet: { kind: "ricker" as const, peakHz: 30 } };
    const counter = new Int32Array(new SharedArrayBuffer(4));
    const controller = new AbortController();
    // About 2.5 s of record: several thousand steps, so the cancel arrives mid-shot.
    const run = modelShots(model, [template("long", 5000)], { ...options, stepCounter: counter }, { pool, signal: controller.signal });
    const failure = run.then(
      () => undefined,
      (err: unknown) => err,
    );
    await untilCounter(counter, 256);
    controller.abort();
    const atCancel = Atomics.load(counter, 0);
    const err = await failure;
    expect(err).toMatchObject({ name: "AbortError" });
    const stoppedAt = Atomics.load(counter, 0);
    // The loop stores the step count, then reads the flag, every 64 steps: at most one more check runs.
    expect(stoppedAt).toBeGreaterThanOrEqual(atCancel);
    expect(stoppedAt - atCancel).toBeLessThanOrEqual(64);
    expect(stoppedAt % 64).toBe(0);
    // The same worker models the next shot to its end.
    const next = await modelShots(model, [template("short", 100)], { ...options, stepCounter: counter }, { pool });
    expect(next.gathers[0].data.length).toBe(8 * 100);
    expect(Atomics.load(counter, 0)).toBe(next.steps);
    expect(next.gathers[0].data.some((v) => v !== 0)).toBe(true);
  }, 60_000);
});
