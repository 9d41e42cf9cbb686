/**
 * The pick assessment of the Quillmoor example: true onsets from the eikonal solver through the
 * true model, checked against the closed-form two-layer refraction times, and the error figures.
 */
import { describe, expect, it } from "vitest";
import { assessPicks, quantile, trueOnsets } from "../../../examples/quillmoor/assess-picks";
import type { GatherSet, PickSet, TraceHeader } from "../../../pipeline/types";

describe("true first-arrival onsets of line QM-1", () => {
  it("match the two-layer refraction times away from the hollow (Telford et al. 1990, Applied Geophysics, §4.3)", () => {
    // Direct wave x / V1; head wave x / V2 + 2h·cos(ic) / V1 with sin(ic) = V1 / V2 (V1 = 400,
    // V2 = 1600 m/s, h = 4 m). Receivers 1 … 19 m from a source at x = −1 m stay clear of the hollow
    // (x 24 … 30 m). Tolerance 0.3 ms: about 1 % of the times, the first-order sweep's error on the
    // 0.125 m grid of the true model (from memory: the factored scheme's error is first order in h).
    const v1 = 400;
    const v2 = 1600;
    const h = 4;
    const ic = Math.asin(v1 / v2);
    const receivers = [0, 2, 5, 9, 12, 18];
    const t = trueOnsets(receivers.map((rx) => ({ sourceX: -1, receiverX: rx })));
    receivers.forEach((rx, i) => {
      const x = rx + 1;
      const expected = Math.min(x / v1, x / v2 + (2 * h * Math.cos(ic)) / v1);
      expect(Math.abs(t[i] - expected) * 1000).toBeLessThanOrEqual(0.3);
    });
  });
});

describe("assessPicks", () => {
  it("reports the error quantiles and the flagged share of picks placed at known distances from the truth", () => {
    const header = (rx: number): TraceHeader => ({
      sourceFile: "",
      channel: rx + 1,
      sourcePoint: 1,
      blow: 0,
      sourceX: -1,
      sourceZ: 0,
      receiverX: rx,
      receiverZ: 0,
      offset: rx + 1,
      stackCount: 1,
      component: "z",
      dead: false,
    });
    const traces = Array.from({ length: 10 }, (_, i) => header(i));
    const gathers: GatherSet = { kind: "gathers", gathers: [{ id: "sp01", sampleIntervalS: 0.00025, sampleCount: 4, startTimeS: 0, traces, data: new Float32Array(40) }] };
    const truth = trueOnsets(traces.map((h) => ({ sourceX: h.sourceX, receiverX: h.receiverX })));
    // Errors 0.5, 1.5, …, 9.5 ms with alternating signs; the last two picks flagged.
    const picks: PickSet = {
      kind: "picks",
      method: "energy-ratio",
      picks: traces.map((_, i) => ({ gatherId: "sp01", traceIndex: i, timeS: truth[i] + ((i % 2 ? -1 : 1) * (i + 0.5)) / 1000, quality: 1, flagged: i >= 8 })),
    };
    const a = assessPicks(picks, gathers);
    expect(a.picks).toBe(10);
    expect(a.medianAbsErrorMs).toBeCloseTo(5, 9); // median of 0.5 … 9.5
    expect(a.p90AbsErrorMs).toBeCloseTo(8.6, 9); // linear interpolation: 8.5 + 0.1 · (9.5 − 8.5)
    expect(a.unflaggedMedianAbsErrorMs).toBeCloseTo(4, 9); // median of 0.5 … 7.5
    expect(a.flaggedFraction).toBeCloseTo(0.2, 12);
    expect(a.wrongFraction).toBeCloseTo(0.5, 12); // 5.5 … 9.5 ms
    expect(quantile([], 0.5)).toBeNaN();
  });
});
