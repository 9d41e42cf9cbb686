/**
 * The "difference" of observed against synthetic draws exactly what the misfit step measures.
 * Reference: the misfit kernels themselves (pipeline/kernels/misfit.ts): least squares with
 * normalised traces ½Σ(s/‖s‖ − o/‖o‖)² (Tarantola 1984) and the normalised correlation 1 − ĉ
 * (Choi & Alkhalifah 2012); and the step's window rule (pipeline/steps/misfit.ts windowSamples).
 */
import { describe, expect, it } from "vitest";
import { leastSquaresMisfit, normalisedCorrelation } from "@/pipeline/kernels/misfit";
import { windowSamples } from "@/pipeline/steps/misfit";
import { misfitPanels, windowOf } from "@/app/ui/traces/misfit-residual";
import type { GatherView } from "@/app/ui/traces/draw-traces";
import type { Gather } from "@/pipeline/types";
import { mulberry32 } from "../../helpers/random";

function gather(rand: () => number, traces: number, samples: number, scale: number): GatherView {
  const data = Float32Array.from({ length: traces * samples }, () => (rand() * 2 - 1) * scale);
  return { data, traces, samples, dtS: 0.001, t0S: -0.004, offsetsM: Array.from({ length: traces }, (_, i) => i) };
}

describe("misfitPanels", () => {
  const rand = mulberry32(2024);
  // Observed and synthetic a thousand times apart in amplitude, as field data and a unit-force model are.
  const obs = gather(rand, 6, 120, 3e-4);
  const syn = gather(rand, 6, 120, 0.7);

  it("with normalised traces, ½ Σ difference² per trace is the least-squares misfit of the step and 1 − correlation", () => {
    const p = misfitPanels(obs, syn, { measure: "least-squares", normaliseTraces: true, windowStartMs: 10, windowEndMs: 90 });
    const { first, end } = p.window;
    for (let t = 0; t < obs.traces; t++) {
      const o = obs.data.subarray(t * obs.samples, (t + 1) * obs.samples);
      const s = syn.data.subarray(t * syn.samples, (t + 1) * syn.samples);
      const d = p.residual.data.subarray(t * obs.samples, (t + 1) * obs.samples);
      let half = 0;
      for (let i = 0; i < d.length; i++) half += 0.5 * d[i] * d[i];
      // float32 residual against the float64 kernel: relative 1e-5 (float32 has 24-bit mantissa, ~6e-8, summed over 81 samples).
      expect(half).toBeCloseTo(leastSquaresMisfit(s, o, first, end, true), 5);
      expect(half).toBeCloseTo(1 - normalisedCorrelation(s, o, first, end), 5);
      // Nothing outside the window is compared, so nothing is drawn there.
      for (let i = 0; i < first; i++) expect(d[i]).toBe(0);
      for (let i = end; i < d.length; i++) expect(d[i]).toBe(0);
    }
  });

  it("puts observed and synthetic on one scale: both traces have unit L2 norm over the window", () => {
    const p = misfitPanels(obs, syn, { measure: "normalised-correlation", normaliseTraces: true });
    for (const g of [p.observed, p.synthetic]) {
      for (let t = 0; t < g.traces; t++) {
        let ss = 0;
        for (let i = 0; i < g.samples; i++) ss += g.data[t * g.samples + i] ** 2;
        expect(Math.sqrt(ss)).toBeCloseTo(1, 5);
      }
    }
  });

  it("without normalisation draws o − s in data units, matching the unnormalised least squares", () => {
    const p = misfitPanels(obs, syn, { measure: "least-squares", normaliseTraces: false });
    expect(p.normalised).toBe(false);
    const o = obs.data.subarray(0, obs.samples);
    const s = syn.data.subarray(0, syn.samples);
    let half = 0;
    for (let i = 0; i < obs.samples; i++) half += 0.5 * p.residual.data[i] ** 2;
    expect(half / leastSquaresMisfit(s, o)).toBeCloseTo(1, 5);
  });

  it("takes the same window samples as the misfit step", () => {
    const g = { samples: 120, dtS: 0.001, t0S: -0.004 };
    const asGather = { sampleCount: 120, sampleIntervalS: 0.001, startTimeS: -0.004 } as Gather;
    for (const [a, b] of [[10, 90], [0, 50.5], [-10, 500], [3.3, 4.4]] as const) {
      expect(windowOf(g, a, b)).toEqual(windowSamples(asGather, a / 1000, b / 1000));
    }
  });

  it("refuses gathers of different sizes", () => {
    expect(() => misfitPanels(obs, gather(rand, 5, 120, 1), { measure: "least-squares", normaliseTraces: true })).toThrow(RangeError);
  });
});
