/**
 * Every signal step gives the same result through the worker pool (blocks of traces in two
 * workers, buffers transferred) as in-process, and leaves its input intact.
 */
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { createWorkerPool, type WorkerPool } from "../../../pipeline/workers/pool";
import { gainStep } from "../../../pipeline/steps/gain";
import { muteStep } from "../../../pipeline/steps/mute";
import { firstArrivalsStep } from "../../../pipeline/steps/first-arrivals";
import { lineSourceStep } from "../../../pipeline/steps/line-source";
import { spectraStep } from "../../../pipeline/steps/spectra";
import { timeWindowStep } from "../../../pipeline/steps/time-window";
import type { AnyStepDefinition } from "../../../pipeline/step";
import type { GatherSet } from "../../../pipeline/types";
import { POOL_MIN_SAMPLES, blockCountFor } from "../../../pipeline/workers/trace-blocks";
import { encodeArtifact } from "../../../pipeline/artifact-codec";
import { makeStepContext } from "../../helpers/step-context";
import { seededRandom } from "../../helpers/random";
import { makeGather } from "./make-gather";

let pool: WorkerPool;
beforeAll(() => {
  pool = createWorkerPool(2);
});
afterAll(async () => {
  await pool.close();
});

function input(): GatherSet {
  const rnd = seededRandom(55);
  const g = makeGather({ traceCount: 48, sampleCount: 4000, sampleIntervalS: 0.00025, startTimeS: -0.01 }, (t, time, h) => {
    const tau = time - Math.abs(h.offset) / 300;
    return (tau >= 0 ? Math.sin(2 * Math.PI * 70 * tau) * Math.exp(-tau * 50) : 0) + 0.02 * rnd.gaussian();
  });
  return { kind: "gathers", gathers: [g] };
}

describe("worker-pool paths", () => {
  it("splits a 48 × 4000 gather into one block per worker", () => {
    expect(48 * 4000).toBeGreaterThanOrEqual(POOL_MIN_SAMPLES);
    expect(blockCountFor({ pool }, 48, 4000)).toBe(2);
    expect(blockCountFor({ pool: undefined as never }, 48, 4000)).toBe(1);
  });

  const cases: Array<[string, AnyStepDefinition, Record<string, unknown>]> = [
    ["gain trace-rms", gainStep, { kind: "trace-rms" }],
    ["gain agc", gainStep, { kind: "agc", agcWindowMs: 50 }],
    ["mute", muteStep, { topMute: "line", bottomMute: true, windows: [{ startMs: 100, endMs: 150, minOffsetM: 10 }] }],
    ["first-arrivals", firstArrivalsStep, {}],
    ["line-source", lineSourceStep, {}],
    ["spectra", spectraStep, {}],
    ["time-window resample", timeWindowStep, { resampleIntervalMs: 1 }],
  ];
  it.each(cases)("%s gives identical outputs with and without the pool", async (_label, step, settings) => {
    const params = step.params.parse(settings);
    const set = input();
    const before = set.gathers[0].data.slice();
    const viaPool = await step.run({ gathers: set }, params, makeStepContext({ pool }));
    const direct = await step.run({ gathers: input() }, params, makeStepContext());
    expect(Buffer.compare(Buffer.from(set.gathers[0].data.buffer), Buffer.from(before.buffer))).toBe(0);
    // Byte-identical artifact encodings (the runner's own codec) mean identical outputs.
    const a = Buffer.from(encodeArtifact(viaPool.outputs));
    const b = Buffer.from(encodeArtifact(direct.outputs));
    expect(a.length).toBe(b.length);
    expect(Buffer.compare(a, b)).toBe(0);
    expect(viaPool.summary).toEqual(direct.summary);
  });
});
