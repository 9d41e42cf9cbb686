/**
 * Step "source-wavelet": estimates the source-time function of the hammer from the observed
 * gathers by stabilised least-squares deconvolution in the frequency domain (Pratt 1999,
 * Geophysics 64, eq. 17): synthetics through the model for a trial wavelet, then the correction
 * filter w(f) = Σ d(f)·s*(f) / (Σ |s(f)|² + ε) summed over the traces of a shot (or of all shots
 * for one shared wavelet), applied to the trial wavelet. Writes the `wavelet` slot: one trace per
 * shot gather (same id), or one trace with id "shared".
 */
import { z } from "zod";
import { checkModelFootprint, MODEL_TOO_LARGE_REMEDY, solverFootprint } from "../model-limits";
import { defineStep, StepInputError, throwIfAborted } from "../step";
import type { Gather, GatherSet } from "../types";
import { modelShots, type GatherTemplate } from "../kernels/fd/model-shots";
import type { SourceKind, VelocityComponent } from "../kernels/fd/simulation";
import { defaultRickerShiftS, ricker } from "../kernels/fd/wavelet";
import { estimateWavelet } from "../kernels/wavelet-estimation";

export const sourceWaveletParams = z
  .object({
    mode: z.enum(["psv", "sh"]).default("psv").describe('Wave mode as in forward-model: "psv" or "sh"'),
    sourceKind: z.enum(["auto", "force-z", "force-x", "explosive", "force-y"]).default("auto").describe('Source as in forward-model; "auto" = force-z (P-SV) or force-y (SH)'),
    component: z.enum(["auto", "z", "x", "y"]).default("auto").describe('Recorded component as in forward-model; "auto" = z (P-SV) or y (SH)'),
    pmlCells: z.number().int().min(0).max(200).default(20).describe("Absorbing boundary thickness, grid cells"),
    freeSurface: z.boolean().default(true).describe("Stress-free top surface"),
    minPointsPerWavelength: z.number().positive().default(5).describe("Fewest grid points per shortest S wavelength at the trial wavelet's highest frequency"),
    trialPeakHz: z.number().positive().default(40).describe("Peak frequency of the trial Ricker wavelet the synthetics are made with, Hz (its band should cover the data's)"),
    perShot: z.boolean().default(false).describe("One wavelet per shot gather (true) or one shared by all shots (false)"),
    waterLevel: z.number().positive().max(1).default(0.01).describe("Stabilisation ε as a fraction of the peak of Σ|s(f)|²"),
    minOffsetM: z.number().min(0).default(0).describe("Smallest |offset| used, m"),
    maxOffsetM: z.number().positive().default(1e9).describe("Largest |offset| used, m"),
    windowStartMs: z.number().default(0).describe("Start of the time window used, ms after the source instant"),
    windowEndMs: z.number().positive().optional().describe("End of the time window used, ms after the source instant; default the trace end"),
    taperMs: z.number().min(0).default(5).describe("Cosine taper at the window ends, ms"),
    lengthMs: z.number().positive().default(100).describe("Length kept of the estimated wavelet, ms (tapered over its last fifth)"),
    shotStride: z.number().int().min(1).default(1).describe("Use every n-th shot gather (1: all)"),
  })
  .superRefine((p, ctx) => {
    if (p.minOffsetM >= p.maxOffsetM) ctx.addIssue({ code: "custom", path: ["maxOffsetM"], message: `maxOffsetM must exceed minOffsetM` });
    if (p.windowEndMs !== undefined && p.windowEndMs <= p.windowStartMs) ctx.addIssue({ code: "custom", path: ["windowEndMs"], message: "windowEndMs must be after windowStartMs" });
  });

export type SourceWaveletParams = z.output<typeof sourceWaveletParams>;

export const sourceWaveletStep = defineStep({
  id: "source-wavelet",
  version: 1,
  title: "Source wavelet",
  description:
    "Estimates the source-time function by stabilised least-squares deconvolution of the observed by the synthetic gathers in the frequency domain (Pratt 1999): synthetics through the model for a trial Ricker wavelet, then the correction filter Σ d·s* / (Σ|s|² + ε) over the traces of a shot or of all shots, applied to the trial wavelet. Per shot or shared; offset range, time window and taper.",
  reads: ["gathers", "model"],
  writes: ["wavelet"],
  params: sourceWaveletParams,
  async run(input, p, ctx) {
    const component: VelocityComponent = p.component === "auto" ? (p.mode === "psv" ? "z" : "y") : p.component;
    const sourceKind: SourceKind = p.sourceKind === "auto" ? (p.mode === "psv" ? "force-z" : "force-y") : p.sourceKind;
    const gathers = input.gathers!.gathers.filter((g, k) => g.traces.length > 0 && k % p.shotStride === 0);
    if (gathers.length === 0) throw new StepInputError("No gathers with traces to estimate a wavelet from.", "gathers");
    const first = gathers[0];
    for (const g of gathers) {
      if (g.sampleIntervalS !== first.sampleIntervalS || g.sampleCount !== first.sampleCount || g.startTimeS !== first.startTimeS) {
        throw new StepInputError(`Gather ${g.id} is sampled differently from ${first.id}; every gather must share sample interval, length and start time.`, "gathers");
      }
    }
    const dt = first.sampleIntervalS;
    // Model only as long as the window needs: the solver's cost grows with it.
    const ns = p.windowEndMs === undefined ? first.sampleCount : Math.min(first.sampleCount, Math.round((p.windowEndMs / 1000 - first.startTimeS) / dt) + 1);
    // The trial wavelet on the data sampling, from t = 0.
    const trial = new Float32Array(ns);
    const shift = defaultRickerShiftS(p.trialPeakHz);
    for (let k = 0; k < ns; k++) trial[k] = ricker(k * dt, p.trialPeakHz, shift);
    const templates: GatherTemplate[] = gathers.map((g) => ({ id: g.id, sampleIntervalS: dt, sampleCount: ns, startTimeS: g.startTimeS, traces: g.traces }));
    throwIfAborted(ctx.signal);
    // Refuse a model too large to simulate before any allocation (one solver buffer per worker).
    const footprint = solverFootprint(input.model!, { mode: p.mode, pmlCells: p.pmlCells, freeSurface: p.freeSurface, workers: Math.min(templates.length, ctx.pool?.size ?? 1) });
    if (footprint) checkModelFootprint(footprint, "model", MODEL_TOO_LARGE_REMEDY);
    const syn = await modelShots(
      input.model!,
      templates,
      {
        mode: p.mode,
        sourceKind,
        component,
        pmlCells: p.pmlCells,
        freeSurface: p.freeSurface,
        minPointsPerWavelength: p.minPointsPerWavelength,
        wavelet: { kind: "samples", samples: trial, intervalS: dt, startTimeS: 0 },
      },
      { pool: ctx.pool, signal: ctx.signal, onShot: (done, total, id) => ctx.progress((0.9 * done) / total, `synthetics for shot ${id} (${done} of ${total})`) },
    );
    const t0 = first.startTimeS;
    const firstSample = Math.max(0, Math.min(ns - 1, Math.round((p.windowStartMs / 1000 - t0) / dt)));
    const endSample = p.windowEndMs === undefined ? ns : Math.max(firstSample + 1, Math.min(ns, Math.round((p.windowEndMs / 1000 - t0) / dt) + 1));
    const weightsOf = (g: Gather) =>
      Float32Array.from(g.traces, (t) => {
        const off = Math.abs(t.receiverX - t.sourceX);
        return !t.dead && off >= p.minOffsetM && off <= p.maxOffsetM ? 1 : 0;
      });
    const keep = Math.min(ns, Math.round(p.lengthMs / 1000 / dt));
    const finish = (w: Float32Array): Float32Array => {
      // Keep the first lengthMs, with a cosine fade over its last fifth.
      const out = new Float32Array(ns);
      const fade = Math.max(1, Math.floor(keep / 5));
      for (let k = 0; k < keep; k++) {
        const f = k < keep - fade ? 1 : 0.5 + 0.5 * Math.cos((Math.PI * (k - (keep - fade))) / fade);
        out[k] = w[k] * f;
      }
      return out;
    };
    const blocks = (list: number[]) => {
      let traces = 0;
      for (const k of list) traces += gathers[k].traces.length;
      const observed = new Float32Array(traces * ns);
      const synthetic = new Float32Array(traces * ns);
      const weights = new Float32Array(traces);
      let row = 0;
      for (const k of list) {
        const g = gathers[k];
        for (let t = 0; t < g.traces.length; t++) observed.set(g.data.subarray(t * g.sampleCount, t * g.sampleCount + ns), (row + t) * ns);
        synthetic.set(syn.gathers[k].data, row * ns);
        weights.set(weightsOf(g), row);
        row += g.traces.length;
      }
      return { observed, synthetic, weights, traces };
    };
    const estimate = (list: number[]) => {
      const b = blocks(list);
      if (!b.weights.some((w) => w > 0)) throw new StepInputError(`No live traces between ${p.minOffsetM} and ${p.maxOffsetM} m offset.`, "maxOffsetM");
      return estimateWavelet({
        observed: b.observed,
        synthetic: b.synthetic,
        traceCount: b.traces,
        sampleCount: ns,
        currentWavelet: trial,
        sampleIntervalS: dt,
        waterLevel: p.waterLevel,
        weights: b.weights,
        firstSample,
        endSample,
        taperMs: p.taperMs,
      });
    };
    const wavelets: Gather[] = [];
    const fits: Array<{ id: string; relativeResidual: number }> = [];
    const make = (id: string, data: Float32Array, sourceX: number): Gather => ({
      id,
      sampleIntervalS: dt,
      sampleCount: ns,
      startTimeS: 0,
      traces: [
        { sourceFile: id, channel: 1, sourcePoint: 0, blow: 0, sourceX, sourceZ: 0, receiverX: sourceX, receiverZ: 0, offset: 0, stackCount: 1, component, dead: false },
      ],
      data,
    });
    if (p.perShot) {
      gathers.forEach((g, k) => {
        const est = estimate([k]);
        wavelets.push(make(g.id, finish(Float32Array.from(est.wavelet)), g.traces[0].sourceX));
        fits.push({ id: g.id, relativeResidual: est.fit });
      });
    } else {
      const est = estimate(gathers.map((_, k) => k));
      wavelets.push(make("shared", finish(Float32Array.from(est.wavelet)), 0));
      fits.push({ id: "shared", relativeResidual: est.fit });
    }
    ctx.progress(1, "wavelet estimated");
    const wavelet: GatherSet = { kind: "gathers", gathers: wavelets };
    const mean = fits.reduce((s, f) => s + f.relativeResidual, 0) / fits.length;
    ctx.log.info(`estimated ${wavelets.length} wavelet(s); mean relative residual of the fit ${mean.toFixed(3)}`);
    return {
      outputs: { wavelet },
      summary: { wavelets: wavelets.length, perShot: p.perShot, meanRelativeResidual: Number(mean.toFixed(4)), shotsUsed: gathers.length, trialPeakHz: p.trialPeakHz },
    };
  },
});
