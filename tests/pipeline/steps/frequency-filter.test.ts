import { describe, expect, it } from "vitest";
import { frequencyFilterStep } from "../../../pipeline/steps/frequency-filter";
import { filterTraces, planFrequencyFilter } from "../../../pipeline/kernels/filter";
import { StepInputError } from "../../../pipeline/step";
import { createWorkerPool, type WorkerPool } from "../../../pipeline/workers/pool";
import { makeStepContext } from "../../helpers/step-context";
import { seededRandom } from "../../helpers/random";
import { makeGather } from "./make-gather";

const parse = (p: unknown) => frequencyFilterStep.params.parse(p);

describe("frequency-filter parameters", () => {
  it("documents defaults and units", () => {
    const p = parse({});
    expect(p).toMatchObject({ passBand: "band-pass", lowCutHz: 5, highCutHz: 120, order: 4, phase: "zero", mainsHz: 0, taperMs: 20 });
  });

  it("rejects a low corner above the high corner, naming the field", () => {
    const r = frequencyFilterStep.params.safeParse({ lowCutHz: 200, highCutHz: 100 });
    expect(r.success).toBe(false);
    expect(r.error?.issues[0].path).toEqual(["lowCutHz"]);
    expect(r.error?.issues[0].message).toMatch(/must be below highCutHz/);
  });

  it("rejects negative tapers and unknown mains frequencies", () => {
    expect(frequencyFilterStep.params.safeParse({ taperMs: -1 }).success).toBe(false);
    expect(frequencyFilterStep.params.safeParse({ mainsHz: 55 }).success).toBe(false);
  });
});

describe("frequency-filter run", () => {
  const rnd = seededRandom(2024);
  const noise = () => rnd.gaussian();

  it("refuses a corner at or above Nyquist of the actual data before any work", async () => {
    const fine = makeGather({ id: "a", traceCount: 2, sampleCount: 100, sampleIntervalS: 0.00025 }, noise);
    const coarse = makeGather({ id: "b", traceCount: 2, sampleCount: 100, sampleIntervalS: 0.004 }, noise); // Nyquist 125 Hz
    const ctx = makeStepContext();
    const params = parse({ highCutHz: 150 });
    const err = await frequencyFilterStep.run({ gathers: { kind: "gathers", gathers: [fine, coarse] } }, params, ctx).catch((e) => e);
    expect(err).toBeInstanceOf(StepInputError);
    expect(err.message).toMatch(/highCutHz 150 Hz is at or above the Nyquist frequency of gather "b" \(sample interval 4 ms, Nyquist 125 Hz\)/);
    expect(err.field).toBe("highCutHz");
    expect(ctx.progressCalls).toHaveLength(0); // nothing was filtered
  });

  it("filters every trace, keeps headers, and reports the effective order", async () => {
    const g = makeGather({ traceCount: 4, sampleCount: 1000, sampleIntervalS: 0.001 }, noise);
    const ctx = makeStepContext();
    const params = parse({ lowCutHz: 10, highCutHz: 100, mainsHz: 50, mainsLines: 20 });
    const res = await frequencyFilterStep.run({ gathers: { kind: "gathers", gathers: [g] } }, params, ctx);
    const out = res.outputs.gathers!.gathers[0];
    expect(out.traces).toEqual(g.traces);
    expect(out.sampleCount).toBe(1000);
    expect(res.summary).toMatchObject({ effectiveOrder: 8, traces: 4 });
    // Nyquist 500 Hz, notch width 2 Hz: lines 50 … 450 Hz are kept, 500 Hz is skipped.
    expect(res.summary?.notchesHz).toEqual([50, 100, 150, 200, 250, 300, 350, 400, 450]);
    expect(out.data).not.toBe(g.data);

  });

  it("passes a sine inside the band and removes sines below, above and at the mains frequency", async () => {
    // One sine per trace through the step itself; amplitudes measured on its output, in the middle
    // of a 4 s trace (far from the end tapers and the start-up transients of the recursions).
    // Expected gains from the Butterworth magnitude |H(f)|² = 1 / (1 + (f/fc)^(2n)) (Butterworth
    // 1930, Wireless Engineer 7; from memory), applied
    // forward and backward (zero phase) so the amplitude gain is |H|²: at 30 Hz with corners 10 and
    // 100 Hz, order 4: 0.9998; at 3 Hz: 6.6e-5; at 250 Hz: 6.5e-4 (analog form; the bilinear
    // transform only steepens it); the 50 Hz notch removes its line.
    const freqs = [30, 3, 250, 50];
    const g = makeGather({ traceCount: 4, sampleCount: 4000, sampleIntervalS: 0.001 }, (t, s) => Math.sin(2 * Math.PI * freqs[t] * s));
    const params = parse({ lowCutHz: 10, highCutHz: 100, mainsHz: 50, mainsLines: 1 });
    const out = (await frequencyFilterStep.run({ gathers: { kind: "gathers", gathers: [g] } }, params, makeStepContext())).outputs.gathers!.gathers[0];
    // Amplitude of a sine from its RMS over whole periods: A = √2 · RMS.
    const amplitude = (t: number) => {
      let sum = 0;
      for (let i = 1500; i < 2500; i++) sum += out.data[t * 4000 + i] ** 2;
      return Math.sqrt(2 * (sum / 1000));
    };
    expect(amplitude(0)).toBeCloseTo(1, 2); // pass band: within 0.005 of 1
    expect(amplitude(1)).toBeLessThan(2e-3); // below the low cut
    expect(amplitude(2)).toBeLessThan(2e-3); // above the high cut
    expect(amplitude(3)).toBeLessThan(0.05); // the mains line, notched
  });

  it("gives the same samples through the worker pool as in-process", async () => {
    let pool: WorkerPool | undefined;
    try {
      pool = createWorkerPool(2);
      const g = makeGather({ traceCount: 48, sampleCount: 4000, sampleIntervalS: 0.00025 }, noise);
      const params = parse({ mainsHz: 50 });
      const viaPool = await frequencyFilterStep.run({ gathers: { kind: "gathers", gathers: [g] } }, params, makeStepContext({ pool }));
      const plan = planFrequencyFilter(
        { passBand: "band-pass", lowCutHz: 5, highCutHz: 120, order: 4, zeroPhase: true, notchesHz: [50, 100, 150], notchWidthHz: 2 },
        0.00025,
        4000,
      );
      const direct = filterTraces({ data: g.data, traceCount: 48, sampleCount: 4000, plan, taperSamples: 80 });
      expect(viaPool.outputs.gathers!.gathers[0].data).toEqual(direct);
      expect(g.data.byteLength).toBe(48 * 4000 * 4); // the input buffer was not transferred away
    } finally {
      await pool?.close();
    }
  });
});
