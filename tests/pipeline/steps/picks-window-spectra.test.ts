import { describe, expect, it } from "vitest";
import { firstArrivalsStep } from "../../../pipeline/steps/first-arrivals";
import { timeWindowStep } from "../../../pipeline/steps/time-window";
import { lineSourceStep } from "../../../pipeline/steps/line-source";
import { spectraStep } from "../../../pipeline/steps/spectra";
import { lineSourceTraces } from "../../../pipeline/kernels/line-source";
import { StepInputError } from "../../../pipeline/step";
import { makeStepContext } from "../../helpers/step-context";
import { makeGather, refractionGather, ricker } from "./make-gather";

const DT = 0.00025;

describe("first-arrivals step", () => {
  it("keeps every pick between the velocity lines it is given (common practice: velocity-bounded search)", async () => {
    const { set, onsets } = refractionGather();
    // The direct wave travels at 400 m/s: lines at 2,000 and 300 m/s bracket it and change nothing.
    const wide = await firstArrivalsStep.run(
      { gathers: set },
      firstArrivalsStep.params.parse({ searchFastestMps: 2000, searchSlowestMps: 300, searchSlowestInterceptMs: 30 }),
      makeStepContext(),
    );
    expect(wide.outputs.picks!.picks.length).toBe(48);
    for (const p of wide.outputs.picks!.picks) expect(Math.abs(p.timeS - onsets[p.traceIndex])).toBeLessThan(0.001);
    // A slowest line at 1,000 m/s with no intercept ends the search before the 400 m/s onsets of
    // all but the nearest traces: those get no pick rather than a wrong one.
    const narrow = await firstArrivalsStep.run(
      { gathers: set },
      firstArrivalsStep.params.parse({ searchSlowestMps: 1000, searchSlowestInterceptMs: 0 }),
      makeStepContext(),
    );
    const offsets = set.gathers[0].traces.map((h) => Math.abs(h.offset));
    for (const p of narrow.outputs.picks!.picks) expect(p.timeS).toBeLessThanOrEqual(offsets[p.traceIndex] / 1000 + 0.0005);
    expect(narrow.outputs.picks!.picks.length).toBeLessThan(10);
    expect(firstArrivalsStep.params.safeParse({ searchFastestMps: 300, searchSlowestMps: 400 }).success).toBe(false);
  });

  it("leaves traces beyond maxOffsetM unpicked and picks the rest as before", async () => {
    const { set } = refractionGather();
    const all = await firstArrivalsStep.run({ gathers: set }, firstArrivalsStep.params.parse({ method: "energy-ratio" }), makeStepContext());
    const near = await firstArrivalsStep.run({ gathers: set }, firstArrivalsStep.params.parse({ method: "energy-ratio", maxOffsetM: 16 }), makeStepContext());
    const offsets = set.gathers[0].traces.map((h) => Math.abs(h.offset));
    const expected = all.outputs.picks!.picks.filter((p) => offsets[p.traceIndex] <= 16);
    expect(near.outputs.picks!.picks.map((p) => [p.traceIndex, p.timeS])).toEqual(expected.map((p) => [p.traceIndex, p.timeS]));
    expect(expected.length).toBe(16); // offsets 1 … 16 m
  });

  it("picks a clean direct wave within 1 ms and flags the trace off the offset trend", async () => {
    const { set, onsets } = refractionGather();
    const res = await firstArrivalsStep.run({ gathers: set }, firstArrivalsStep.params.parse({}), makeStepContext());
    const picks = res.outputs.picks!;
    expect(picks.method).toBe("information-criterion");
    expect(picks.picks.length).toBe(48);
    // 1 ms = 4 samples at 0.25 ms: a noise-free onset should be picked within a few samples
    // (common practice for automatic pickers on clean data).
    for (const p of picks.picks) expect(Math.abs(p.timeS - onsets[p.traceIndex])).toBeLessThan(0.001);
    expect(picks.picks.filter((p) => p.flagged).map((p) => p.traceIndex)).toEqual([30]);
    expect(res.summary).toMatchObject({ picked: 48, flagged: 1 });
    expect(res.outputs.report!.role).toBe("first-arrivals");
    expect(res.series![0].points).toHaveLength(48);
  });

  it("gives clear errors for an unknown picker and bad windows", async () => {
    const unknown = firstArrivalsStep.params.safeParse({ method: "neural" });
    expect(unknown.success).toBe(false);
    expect(unknown.error?.issues[0].path).toEqual(["method"]);
    expect(unknown.error?.issues[0].message).toMatch(/energy-ratio.*information-criterion/);
    const windows = firstArrivalsStep.params.safeParse({ shortWindowMs: 20, longWindowMs: 10 });
    expect(windows.error?.issues[0].path).toEqual(["longWindowMs"]);
    expect(firstArrivalsStep.params.safeParse({ shortWindowMs: -1 }).success).toBe(false);
    const { set } = refractionGather();
    const err = await firstArrivalsStep
      .run({ gathers: set }, firstArrivalsStep.params.parse({ searchStartMs: 900 }), makeStepContext())
      .catch((e) => e);
    expect(err).toBeInstanceOf(StepInputError);
    expect(err.message).toMatch(/search window 900 … end ms lies outside gather "sp01"/);
  });
});

describe("time-window step", () => {
  it("applies the trigger delay, cuts on the original samples, pads beyond the record", async () => {
    const g = makeGather({ traceCount: 2, sampleCount: 100, sampleIntervalS: 0.001, startTimeS: -0.01 }, (t, time) => time);
    const res = await timeWindowStep.run({ gathers: { kind: "gathers", gathers: [g] } }, timeWindowStep.params.parse({ triggerDelayMs: 2, startMs: 0, endMs: 100 }), makeStepContext());
    const out = res.outputs.gathers!.gathers[0];
    expect(out.startTimeS).toBeCloseTo(0, 12);
    expect(out.sampleCount).toBe(101);
    // Sample at 0 ms after the delay is the one recorded at −2 ms before it.
    expect(out.data[0]).toBeCloseTo(-0.002, 6);
    expect(out.data[91]).toBeCloseTo(0.089, 6); // the last recorded sample, at 91 ms after the delay
    expect(out.data[92]).toBe(0); // beyond the record: zero padding
    expect(out.traces).toBe(g.traces);
  });

  it("resamples to a longer interval with the new axis in the gather", async () => {
    const g = makeGather({ traceCount: 3, sampleCount: 4000, sampleIntervalS: DT }, (t, time) => Math.sin(2 * Math.PI * 40 * time));
    const res = await timeWindowStep.run({ gathers: { kind: "gathers", gathers: [g] } }, timeWindowStep.params.parse({ resampleIntervalMs: 1, startMs: 100, endMs: 800 }), makeStepContext());
    const out = res.outputs.gathers!.gathers[0];
    expect(out.sampleIntervalS).toBeCloseTo(0.001, 12);
    expect(out.sampleCount).toBe(701);
    expect(out.data[2 * 701 + 100]).toBeCloseTo(Math.sin(2 * Math.PI * 40 * 0.2), 2);
    expect(res.summary).toMatchObject({ resampled: 1, sampleCount: 701 });
  });

  it("refuses negative windows in the schema and windows outside the data at run start", async () => {
    const neg = timeWindowStep.params.safeParse({ startMs: 100, endMs: 50 });
    expect(neg.error?.issues[0].path).toEqual(["endMs"]);
    expect(timeWindowStep.params.safeParse({ resampleIntervalMs: -1 }).success).toBe(false);
    const g = makeGather({ traceCount: 1, sampleCount: 100, sampleIntervalS: 0.001 });
    const err = await timeWindowStep.run({ gathers: { kind: "gathers", gathers: [g] } }, timeWindowStep.params.parse({ startMs: 500, endMs: 600 }), makeStepContext()).catch((e) => e);
    expect(err).toBeInstanceOf(StepInputError);
    expect(err.message).toMatch(/lies outside gather "sp01"/);
  });
});

describe("line-source step", () => {
  it("converts with the source-receiver distance of each trace", async () => {
    const g = makeGather({ traceCount: 4, sampleCount: 800, sampleIntervalS: DT, sourceX: -2 }, (t, time, h) => ricker(time - Math.abs(h.offset) / 300, 60));
    const res = await lineSourceStep.run({ gathers: { kind: "gathers", gathers: [g] } }, lineSourceStep.params.parse({ method: "single-velocity", velocityMps: 300 }), makeStepContext());
    const direct = lineSourceTraces({ data: g.data, traceCount: 4, sampleCount: 800, startTimeS: 0, sampleIntervalS: DT, distancesM: Float64Array.of(2, 3, 4, 5), method: "single-velocity", velocityMps: 300 });
    expect(res.outputs.gathers!.gathers[0].data).toEqual(direct);
    expect(lineSourceStep.params.safeParse({ velocityMps: 0 }).success).toBe(false);
  });

  it("marks traces at zero source-receiver distance dead (the transformation's factor r·sqrt(2v/...) is zero there, Forbriger et al. 2014)", async () => {
    const g = makeGather({ traceCount: 4, sampleCount: 400, sampleIntervalS: DT, sourceX: 1 }, (t, time, h) => ricker(time - Math.abs(h.offset) / 300, 60));
    const res = await lineSourceStep.run({ gathers: { kind: "gathers", gathers: [g] } }, lineSourceStep.params.parse({}), makeStepContext());
    const out = res.outputs.gathers!.gathers[0];
    expect(out.traces.map((h) => [h.offset, h.dead])).toEqual(g.traces.map((h) => [h.offset, h.offset === 0]));
    expect(res.summary).toMatchObject({ zeroDistance: 1 });
  });
});

describe("spectra step", () => {
  it("writes per-trace spectra and a mean over live traces only", async () => {
    const g = makeGather({ traceCount: 3, sampleCount: 1024, sampleIntervalS: 0.001 }, (t, time) => (t === 1 ? 0 : Math.sin(2 * Math.PI * 125 * time)));
    g.traces[1] = { ...g.traces[1], dead: true };
    const res = await spectraStep.run({ gathers: { kind: "gathers", gathers: [g] } }, spectraStep.params.parse({ taperPercent: 0, maxFrequencyHz: 200 }), makeStepContext());
    const s = res.outputs.spectra!;
    const nf = s.frequenciesHz.length;
    expect(s.frequenciesHz[nf - 1]).toBeLessThanOrEqual(200);
    const k125 = Math.round(125 / s.frequenciesHz[1]);
    expect(s.gathers[0].mean[k125]).toBeCloseTo(s.gathers[0].perTrace[k125], 4); // the dead trace is left out
    expect(s.gathers[0].perTrace.length).toBe(3 * nf);
    expect(res.summary).toMatchObject({ liveTraces: 2 });
    expect(res.outputs.gathers).toBeUndefined();
  });
});
