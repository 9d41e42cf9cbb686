/**
 * Step "waveform-inversion": full-waveform inversion of the shot gathers for the elastic model.
 *
 * Method (each piece cited where it lives):
 * - Frequency continuation in stages (Bunks et al. 1995, Geophysics 60; Brossier et al. 2009,
 *   Geophysics 74): each stage low-passes the observed data and the source wavelet by the same
 *   causal Butterworth filter, so the synthetics carry exactly the observed band.
 * - Misfit and adjoint source per stage (least squares, trace-normalised least squares, normalised
 *   correlation after Choi & Alkhalifah 2012, envelope after Bozdağ et al. 2011):
 *   pipeline/kernels/misfit-adjoint.ts.
 * - Gradient by the adjoint-state method, shot by shot on the worker pool (Tarantola 1986; Mora
 *   1987; Plessix 2006): pipeline/kernels/fwi/shot-gradient.ts.
 * - A change of variables that carries the preconditioner (diagonal pseudo-Hessian, Shin et al.
 *   2001), tapers around sources and receivers, Gaussian smoothing and the bounds exactly:
 *   pipeline/kernels/fwi/parameterisation.ts.
 * - L-BFGS with a strong-Wolfe line search (Nocedal & Wright 2006, alg. 7.4, 3.5):
 *   pipeline/kernels/optim/.
 * - Source-wavelet re-estimation per stage where asked (Pratt 1999, Geophysics 64).
 *
 * The step checkpoints after every iteration (stage, optimiser memory, wavelets, curves) and
 * resumes from the last finished iteration; every iteration's model and gradient are recorded as
 * intermediate results, and each stage's synthetics and residuals at its end.
 */
import { z } from "zod";
import { checkModelFootprint, MODEL_TOO_LARGE_REMEDY, solverFootprint } from "../model-limits";
import { defineStep, StepInputError, throwIfAborted, type StepContext } from "../step";
import type { ElasticModel, Gather, GatherSet } from "../types";
import type { SourceKind, VelocityComponent, ShotPositions } from "../kernels/fd/simulation";
import { planFrequencyFilter, filterTraces } from "../kernels/filter";
import type { InversionMeasure } from "../kernels/misfit-adjoint";
import type { ShotGradientInput, ShotGradientOutput } from "../kernels/fwi/shot-gradient";
import {
  buildScale,
  checkModelInsideBounds,
  modelFromVector,
  pointTaper,
  vectorGradient,
  vectorLength,
  INVERTED_PARAMETERS,
  type InvertedSet,
  type ModelBounds,
  type Parameterisation,
} from "../kernels/fwi/parameterisation";
import { lbfgsIteration, startLbfgs, type LbfgsState } from "../kernels/optim/lbfgs";
import { bandLimitWavelet, butterworthLevelHz, estimateWavelet, refilterWavelet } from "../kernels/wavelet-estimation";
import { butterworthLowPass } from "../kernels/butterworth";
import { ricker, defaultRickerShiftS, waveletBand } from "../kernels/fd/wavelet";
import { shotExecutorOf } from "../workers/shot-executor";

const MEASURES = ["least-squares", "trace-normalised-least-squares", "normalised-correlation", "envelope"] as const;

const stageSchema = z.object({
  lowPassHz: z.number().positive().describe("Low-pass corner of this stage, Hz (causal Butterworth on observed data and wavelet alike)"),
  filterOrder: z.number().int().min(1).max(12).default(6).describe("Order of the stage's Butterworth low-pass"),
  measure: z
    .enum(MEASURES)
    .default("normalised-correlation")
    .describe('Misfit measure: "least-squares", "trace-normalised-least-squares", "normalised-correlation" (Choi & Alkhalifah 2012; blind to amplitude), "envelope" (Bozdağ et al. 2011)'),
  iterations: z
    .number()
    .int()
    .min(0)
    .max(200)
    .default(8)
    .describe("Most L-BFGS iterations in this stage (0: only measure the model in this stage's band, change nothing)"),
  stopBelowRelativeChange: z
    .number()
    .min(0)
    .max(1)
    .default(0.005)
    .describe("Stop the stage when an iteration lowers the misfit by less than this fraction of the previous value"),
  minOffsetM: z.number().min(0).default(0).describe("Smallest |offset| compared, m"),
  maxOffsetM: z.number().positive().default(1e9).describe("Largest |offset| compared, m"),
  windowStartMs: z.number().default(0).describe("Start of the compared time window, ms after the source instant"),
  windowEndMs: z.number().positive().optional().describe("End of the compared time window, ms after the source instant; default the trace end"),
  reestimateWavelet: z.boolean().default(true).describe("Estimate the source wavelet again at the start of this stage (Pratt 1999)"),
});

export type InversionStage = z.output<typeof stageSchema>;

export const waveformInversionParams = z
  .object({
    mode: z.enum(["psv", "sh"]).default("psv").describe('Wave mode as in forward-model: "psv" or "sh"'),
    sourceKind: z.enum(["auto", "force-z", "force-x", "explosive", "force-y"]).default("auto").describe('Source as in forward-model; "auto" = force-z (P-SV) or force-y (SH)'),
    component: z.enum(["auto", "z", "x", "y"]).default("auto").describe('Recorded component as in forward-model; "auto" = z (P-SV) or y (SH)'),
    pmlCells: z.number().int().min(0).max(200).default(20).describe("Absorbing boundary thickness, grid cells"),
    freeSurface: z.boolean().default(true).describe("Stress-free top surface"),
    minPointsPerWavelength: z.number().positive().default(5).describe("Fewest grid points per shortest S wavelength at the highest frequency a stage carries"),
    invertFor: z
      .enum(["vs", "vs-vp", "vs-vp-rho"])
      .default("vs")
      .describe('Inverted parameters: "vs" (Vp and density held), "vs-vp", or "vs-vp-rho" (velocity–density parameterisation)'),
    fixedAboveDepthM: z.number().min(0).default(0).describe("Hold the model fixed above this depth, m (0: nothing held)"),
    fixedOutsideSpread: z.boolean().default(true).describe("Hold the model fixed left of the first and right of the last source or receiver"),
    bounds: z
      .object({
        vsMinMps: z.number().positive().default(50).describe("Lowest Vs, m/s"),
        vsMaxMps: z.number().positive().default(1500).describe("Highest Vs, m/s"),
        vpMinMps: z.number().positive().default(100).describe("Lowest Vp, m/s"),
        vpMaxMps: z.number().positive().default(4000).describe("Highest Vp, m/s"),
        rhoMinKgM3: z.number().positive().default(1000).describe("Lowest density, kg/m³"),
        rhoMaxKgM3: z.number().positive().default(3000).describe("Highest density, kg/m³"),
        minVpVsRatio: z.number().default(1.5).describe("Smallest Vp/Vs (above √2 so λ > 0; 1.5 is Poisson's ratio 0.1)"),
      })
      .default({ vsMinMps: 50, vsMaxMps: 1500, vpMinMps: 100, vpMaxMps: 4000, rhoMinKgM3: 1000, rhoMaxKgM3: 3000, minVpVsRatio: 1.5 })
      .describe("Bounds kept by the parameterisation"),
    waveletFrom: z.enum(["wavelet-slot", "ricker"]).default("wavelet-slot").describe('Starting source wavelet: the wavelet slot (from source-wavelet) or a Ricker wavelet'),
    rickerPeakHz: z.number().positive().default(30).describe("Peak frequency of the Ricker wavelet, Hz"),
    waveletLeadMs: z
      .number()
      .min(0)
      .max(500)
      .default(60)
      .describe(
        "How long before the source instant a re-estimated wavelet may start, ms: a zero-phase filter in the processing spreads the hammer's pulse to both sides of t = 0, and a wavelet kept causal cannot follow it (the solver then starts the source this much earlier)",
      ),
    shotStride: z.number().int().min(1).default(1).describe("Use every n-th shot gather (1: all)"),
    preconditioning: z.enum(["pseudo-hessian", "none"]).default("pseudo-hessian").describe("Diagonal pseudo-Hessian preconditioning (Shin et al. 2001) or none"),
    stabilisation: z.number().positive().max(1).default(0.05).describe("Added to the illumination as a fraction of its maximum before dividing by it"),
    smoothingM: z.number().min(0).default(0.5).describe("Standard deviation of the Gaussian smoothing of the model update, m"),
    sourceTaperM: z.number().min(0).default(1.5).describe("Radius around each source in which the update fades to zero, m"),
    receiverTaperM: z.number().min(0).default(0.5).describe("Radius around each receiver in which the update fades to zero, m"),
    lbfgsMemory: z.number().int().min(1).max(30).default(5).describe("L-BFGS memory: correction pairs kept"),
    firstStepFraction: z.number().positive().max(1).default(0.05).describe("First trial step of a stage: largest model change as a fraction of the parameter's mean"),
    maxLineSearchEvaluations: z.number().int().min(2).max(20).default(6).describe("Most misfit evaluations in one line search"),
    measureTable: z
      .boolean()
      .default(true)
      .describe(
        "At the end, measure the starting and the final model with every stage's filter, offsets, window and measure, each model with its own re-estimated wavelet (two solves per shot for each model and stage)",
      ),
    stages: z
      .array(stageSchema)
      .min(1)
      .default([{ lowPassHz: 20, filterOrder: 6, measure: "normalised-correlation", iterations: 8, stopBelowRelativeChange: 0.005, minOffsetM: 0, maxOffsetM: 1e9, windowStartMs: 0, reestimateWavelet: true }])
      .describe("Frequency stages, lowest corner first (Bunks et al. 1995)"),
  })
  .superRefine((p, ctx) => {
    const issue = (path: Array<string | number>, message: string) => ctx.addIssue({ code: "custom", path, message });
    if (p.mode === "sh" && p.invertFor !== "vs") issue(["invertFor"], 'SH waves see only Vs and density: use invertFor "vs"');
    if (p.bounds.minVpVsRatio <= Math.SQRT2) issue(["bounds", "minVpVsRatio"], `minVpVsRatio must be above √2 ≈ 1.4142 so λ stays positive, got ${p.bounds.minVpVsRatio}`);
    p.stages.forEach((s, i) => {
      if (s.minOffsetM >= s.maxOffsetM) issue(["stages", i, "maxOffsetM"], `maxOffsetM (${s.maxOffsetM} m) must exceed minOffsetM (${s.minOffsetM} m)`);
      if (s.windowEndMs !== undefined && s.windowEndMs <= s.windowStartMs) issue(["stages", i, "windowEndMs"], `windowEndMs must be after windowStartMs`);
      if (i > 0 && s.lowPassHz < p.stages[i - 1].lowPassHz) issue(["stages", i, "lowPassHz"], `stages go from low to high frequency: ${s.lowPassHz} Hz comes after ${p.stages[i - 1].lowPassHz} Hz`);
    });
    for (const [lo, hi] of [["vsMinMps", "vsMaxMps"], ["vpMinMps", "vpMaxMps"], ["rhoMinKgM3", "rhoMaxKgM3"]] as const) {
      if (p.bounds[lo] >= p.bounds[hi]) issue(["bounds", hi], `${hi} must exceed ${lo}`);
    }
  });

export type WaveformInversionParams = z.output<typeof waveformInversionParams>;

/** One shot as the inversion uses it. */
interface ShotData {
  id: string;
  positions: ShotPositions & { receiverX: number[]; receiverZ: number[] };
  gather: Gather;
  /** 1 for live traces, 0 for dead. */
  live: Float32Array;
}

/** What the step saves after every iteration (plain data). */
interface InversionCheckpoint {
  version: 2;
  stage: number;
  /** Iteration within the stage, 0 before the first. */
  stageIteration: number;
  /** Iterations done in all stages. */
  iteration: number;
  forwardSolves: number;
  model: ElasticModel;
  parameterisation: Parameterisation | null;
  lbfgs: LbfgsState | null;
  /** Wavelet per shot id at the data sampling (filtered to the stage band). */
  wavelets: Record<string, Float32Array>;
  /** Misfit of the previous iteration of this stage (for the stopping test). */
  previousMisfit: number | null;
  curve: Array<{ x: number; y: number; group: string }>;
  stepCurve: Array<{ x: number; y: number; group: string }>;
  stageRecords: StageRecord[];
  /** Rows of the end-of-inversion measure table done so far (resumed like the iterations). */
  measureRows?: MeasureRow[];
}

/**
 * One row of the measure table: the starting and the final model under one stage's measure, each
 * with the wavelet re-estimated for it in that stage's band, so that a wavelet fitted to one model
 * does not favour it over the other.
 */
export interface MeasureRow {
  stage: number;
  lowPassHz: number;
  measure: InversionMeasure;
  startModelMisfit: number;
  finalModelMisfit: number;
  /** finalModelMisfit / startModelMisfit. */
  ratio: number;
}

/** Per stage in the report. */
interface StageRecord {
  stage: number;
  lowPassHz: number;
  measure: InversionMeasure;
  iterations: number;
  startMisfit: number;
  endMisfit: number;
  stoppedBy: string;
  waveletFit?: number;
  /**
   * A stage after the first that re-estimates its wavelet: its first misfit measured with the
   * wavelets the last stage ended with, before the new ones (the change of band and offsets alone).
   */
  startMisfitWithLastWavelet?: number;
}

function sampled(w: { peakHz: number }, intervalS: number, count: number): Float32Array {
  const out = new Float32Array(count);
  const shift = defaultRickerShiftS(w.peakHz);
  for (let k = 0; k < count; k++) out[k] = ricker(k * intervalS, w.peakHz, shift);
  return out;
}

function lowPass(data: Float32Array, traceCount: number, sampleCount: number, intervalS: number, hz: number, order: number): Float32Array {
  const plan = planFrequencyFilter(
    { passBand: "low-pass", lowCutHz: 0, highCutHz: hz, order, zeroPhase: false, notchesHz: [], notchWidthHz: 1 },
    intervalS,
    sampleCount,
  );
  return filterTraces({ data, traceCount, sampleCount, plan, taperSamples: 0 });
}

/**
 * The bounds of a stage: the lowest Vs raised to what the grid carries at the stage's band,
 * minPoints · fmax · h, with fmax where the stage wavelets' spectra fall below 5 % of their peak
 * (as the solver's accuracy check measures it).
 */
function gridBounds(b: ModelBounds, wavelets: Record<string, Float32Array>, shots: ShotData[], dt: number, h: number, minPoints: number): ModelBounds {
  let fmax = 0;
  for (const s of shots) fmax = Math.max(fmax, waveletBand({ kind: "samples", samples: wavelets[s.id], intervalS: dt, startTimeS: 0 }).maxHz);
  // A hair above the limit, so rounding in the check never refuses a cell at the bound.
  const floor = minPoints * fmax * h * 1.001;
  return floor > b.vsMin ? { ...b, vsMin: floor } : b;
}

/** A copy of the model with Vs raised to `vsMin` where lower (and Vp kept at ratio · Vs). */
function raiseVs(m: ElasticModel, vsMin: number, ratio: number): ElasticModel {
  const vs = Float32Array.from(m.vs, (v) => Math.max(v, vsMin));
  const vp = Float32Array.from(m.vp, (v, i) => Math.max(v, ratio * vs[i]));
  return { ...m, vs, vp };
}

/** The first `count` samples of every trace of a gather. */
function truncate(g: Gather, count: number): Gather {
  const data = new Float32Array(g.traces.length * count);
  for (let t = 0; t < g.traces.length; t++) data.set(g.data.subarray(t * g.sampleCount, t * g.sampleCount + count), t * count);
  return { ...g, sampleCount: count, data };
}

/** Shot positions of a gather from its headers. */
function positionsOf(g: Gather): ShotData["positions"] {
  return {
    sourceX: g.traces[0].sourceX,
    sourceZ: g.traces[0].sourceZ,
    receiverX: g.traces.map((t) => t.receiverX),
    receiverZ: g.traces.map((t) => t.receiverZ),
  };
}

/** Mask of fixed cells: above a depth, and outside the spread. */
function fixedMask(model: ElasticModel, p: WaveformInversionParams, shots: ShotData[]): Uint8Array {
  const { nx, nz, spacingM: h, originX, originZ } = model;
  const fixed = new Uint8Array(nx * nz);
  let xMin = Infinity;
  let xMax = -Infinity;
  for (const s of shots) {
    xMin = Math.min(xMin, s.positions.sourceX, ...s.positions.receiverX);
    xMax = Math.max(xMax, s.positions.sourceX, ...s.positions.receiverX);
  }
  for (let j = 0; j < nz; j++) {
    const z = originZ + j * h;
    for (let i = 0; i < nx; i++) {
      const x = originX + i * h;
      if (z < p.fixedAboveDepthM || (p.fixedOutsideSpread && (x < xMin || x > xMax))) fixed[j * nx + i] = 1;
    }
  }
  return fixed;
}

export const waveformInversionStep = defineStep({
  id: "waveform-inversion",
  version: 3,
  title: "Waveform inversion",
  description:
    "Full-waveform inversion of the shot gathers for Vs (and Vp, density): frequency stages of rising low-pass corner (Bunks et al. 1995), adjoint-state gradients per shot on the worker pool (Tarantola 1986; Plessix 2006), pseudo-Hessian preconditioning (Shin et al. 2001), L-BFGS with a Wolfe line search (Nocedal & Wright 2006), bounds on the model, wavelet re-estimation per stage (Pratt 1999). Records every iteration's model and gradient, checkpoints after each iteration and resumes from the last.",
  reads: ["gathers", "model"],
  optionalReads: ["wavelet"],
  writes: ["model", "synthetic", "report"],
  params: waveformInversionParams,
  async run(input, p, ctx) {
    const component: VelocityComponent = p.component === "auto" ? (p.mode === "psv" ? "z" : "y") : p.component;
    const sourceKind: SourceKind = p.sourceKind === "auto" ? (p.mode === "psv" ? "force-z" : "force-y") : p.sourceKind;
    const observed = input.gathers!;
    const startModel = input.model!;
    const bounds: ModelBounds = {
      vsMin: p.bounds.vsMinMps,
      vsMax: p.bounds.vsMaxMps,
      vpMin: p.bounds.vpMinMps,
      vpMax: p.bounds.vpMaxMps,
      rhoMin: p.bounds.rhoMinKgM3,
      rhoMax: p.bounds.rhoMaxKgM3,
      minVpVsRatio: p.bounds.minVpVsRatio,
    };
    try {
      checkModelInsideBounds(startModel, bounds);
    } catch (e) {
      throw new StepInputError((e as Error).message, "bounds");
    }
    const all = observed.gathers.filter((g) => g.traces.length > 0);
    if (all.length === 0) throw new StepInputError("No gathers with traces to invert.", "gathers");
    const shots: ShotData[] = all
      .filter((_, k) => k % p.shotStride === 0)
      .map((g) => ({ id: g.id, positions: positionsOf(g), gather: g, live: Float32Array.from(g.traces, (t) => (t.dead ? 0 : 1)) }));
    const first = shots[0].gather;
    for (const s of shots) {
      if (s.gather.sampleIntervalS !== first.sampleIntervalS || s.gather.sampleCount !== first.sampleCount || s.gather.startTimeS !== first.startTimeS) {
        throw new StepInputError(`Gather ${s.id} is sampled differently from ${first.id}; every gather must share sample interval, length and start time.`, "gathers");
      }
    }
    const dt = first.sampleIntervalS;
    // Model only as long as the latest compared window needs: the solver's cost grows with it.
    const ns = Math.min(
      first.sampleCount,
      Math.max(...p.stages.map((s) => (s.windowEndMs === undefined ? first.sampleCount : Math.round((s.windowEndMs / 1000 - first.startTimeS) / dt) + 1))),
    );
    if (ns < first.sampleCount) {
      for (const s of shots) s.gather = truncate(s.gather, ns);
    }
    // The wavelets start waveletLeadMs before the source instant: index 0 of every wavelet array is
    // at t = −lead. The solver starts at the first wavelet sample, so its traces are read `lead` later
    // than the gathers' times (the same traces, on the gathers' time axis).
    const leadSamples = Math.round(p.waveletLeadMs / 1000 / dt);
    const lead = leadSamples * dt;
    const waveletCount = ns + leadSamples;
    const output = { intervalS: dt, count: ns, startTimeS: first.startTimeS + lead };

    // Refuse a model too large before any allocation: per worker one solver buffer plus the forward
    // wavefield kept for the gradient (velocities and strain rates on the model cells, 5 arrays in
    // P-SV, 3 in SH, every K-th step with K·dt ≤ 1/(2·fmax): about 2·fmax·T + 1 kept steps). fmax is
    // taken as twice the highest stage's lowPassHz, an upper estimate of the filtered band's edge.
    const fmaxHz = 2 * Math.max(...p.stages.map((s) => s.lowPassHz));
    const keptSteps = Math.ceil(2 * fmaxHz * (ns * dt + lead)) + 1;
    const storedBytes = keptSteps * (p.mode === "psv" ? 5 : 3) * startModel.nx * startModel.nz * 4;
    const footprint = solverFootprint(startModel, {
      mode: p.mode,
      pmlCells: p.pmlCells,
      freeSurface: p.freeSurface,
      workers: Math.min(shots.length, ctx.pool?.size ?? 1),
      extraBytes: storedBytes,
      extraLabel: `stored forward wavefields (${keptSteps} steps)`,
    });
    if (footprint) checkModelFootprint(footprint, "model", `${MODEL_TOO_LARGE_REMEDY} A shorter windowEndMs or a lower lowPassHz keeps fewer wavefields.`);

    const startWavelets = (): Record<string, Float32Array> => {
      const out: Record<string, Float32Array> = {};
      for (const s of shots) {
        const samples = new Float32Array(waveletCount);
        if (p.waveletFrom === "ricker") {
          samples.set(sampled({ peakHz: p.rickerPeakHz }, dt, ns), leadSamples);
          out[s.id] = samples;
          continue;
        }
        const slot = input.wavelet;
        if (!slot || slot.gathers.length === 0) throw new StepInputError('waveletFrom "wavelet-slot" needs a wavelet from an earlier step (source-wavelet).', "waveletFrom");
        const w = slot.gathers.find((g) => g.id === s.id) ?? slot.gathers[0];
        if (w.sampleIntervalS !== dt) throw new StepInputError(`The wavelet is sampled every ${w.sampleIntervalS} s, the gathers every ${dt} s; estimate it on the same gathers.`, "waveletFrom");
        // Sample j of the slot's wavelet is at w.startTimeS + j·dt, i.e. at index j + first here.
        const first = leadSamples + Math.round(w.startTimeS / dt);
        for (let j = 0; j < w.sampleCount; j++) {
          const k = first + j;
          if (k >= 0 && k < waveletCount) samples[k] = w.data[j];
        }
        out[s.id] = samples;
      }
      return out;
    };

    // Cancel reaches the workers through a shared flag (checked inside the time loop).
    const cancelFlag = new Int32Array(new SharedArrayBuffer(4));
    const onAbort = () => Atomics.store(cancelFlag, 0, 1);
    ctx.signal.addEventListener("abort", onAbort, { once: true });

    let cp = ctx.loadCheckpoint() as InversionCheckpoint | null;
    if (cp && cp.version !== 2) cp = null;
    if (cp) ctx.log.info(`resuming from the checkpoint after iteration ${cp.iteration} (stage ${cp.stage + 1})`);
    const state: InversionCheckpoint = cp ?? {
      version: 2,
      stage: 0,
      stageIteration: 0,
      iteration: 0,
      forwardSolves: 0,
      model: startModel,
      parameterisation: null,
      lbfgs: null,
      wavelets: startWavelets(),
      previousMisfit: null,
      curve: [],
      stepCurve: [],
      stageRecords: [],
    };
    const totalIterations = p.stages.reduce((s, st) => s + st.iterations, 0);
    const started = Date.now();

    try {
      while (state.stage < p.stages.length) {
        const stage = p.stages[state.stage];
        const group = `stage ${state.stage + 1} (${stage.lowPassHz} Hz)`;
        const prepared = prepareStage(stage, shots, dt, ns);
        if (!state.parameterisation) {
          // Stage start: the starting wavelets in the stage band (re-estimated when asked), the
          // illumination and the scale, and the first evaluation.
          throwIfAborted(ctx.signal);
          // Before a new wavelet replaces the last stage's: the model measured in this stage's band,
          // offsets and window with the wavelets the last stage ended with, moved from the last
          // stage's causal low-pass to this one's (they were estimated against data through the
          // last filter, whose delay differs). The misfit curve shows the change of measure there,
          // then the effect of the new wavelet (one forward solve per shot).
          let withLastWavelet: number | undefined;
          if (state.stage > 0 && stage.reestimateWavelet) {
            const physics = { sourceKind, component, output, cancelFlag };
            const last = p.stages[state.stage - 1];
            if (last.lowPassHz !== stage.lowPassHz || last.filterOrder !== stage.filterOrder) {
              const from = butterworthLowPass(last.filterOrder, last.lowPassHz, 1 / dt);
              const to = butterworthLowPass(stage.filterOrder, stage.lowPassHz, 1 / dt);
              const moved: Record<string, Float32Array> = {};
              for (const s of shots) moved[s.id] = Float32Array.from(refilterWavelet(state.wavelets[s.id], dt, from, to));
              state.wavelets = moved;
            }
            withLastWavelet = (await evaluate(ctx, state, prepared, shots, p, physics, state.model, false, `stage-${state.stage + 1}/last-wavelet`)).misfit;
            ctx.extendSeries({ name: "misfit-with-last-wavelet", xLabel: "iteration", yLabel: "misfit" }, [{ x: state.iteration, y: withLastWavelet, group }]);
            ctx.log.info(`stage ${state.stage + 1}: misfit ${withLastWavelet.toPrecision(4)} with the last stage's wavelet, before re-estimating it`);
          }
          const base = startWavelets();
          for (const s of shots) state.wavelets[s.id] = lowPass(base[s.id], 1, waveletCount, dt, stage.lowPassHz, stage.filterOrder);
          let waveletFit: number | undefined;
          if (stage.reestimateWavelet) {
            waveletFit = await reestimate(ctx, state, prepared, shots, p, { sourceKind, component, output, cancelFlag });
            ctx.log.info(`stage ${state.stage + 1}: source wavelet re-estimated (mean relative residual ${waveletFit.toFixed(3)})`);
          }
          recordStageWavelets(ctx, state.stage, stage, shots, state.wavelets, dt, -lead, waveletFit);
          // The grid resolves waves down to Vs = points · fmax · h: in this stage no cell may go
          // slower, or the solver's accuracy check would refuse the model half way (common practice:
          // 5 to 8 points per shortest S wavelength).
          const stageBounds = gridBounds(bounds, state.wavelets, shots, dt, state.model.spacingM, p.minPointsPerWavelength);
          if (stageBounds.vsMin > bounds.vsMin) {
            ctx.log.warn(
              `stage ${state.stage + 1}: Vs kept at or above ${stageBounds.vsMin.toFixed(0)} m/s, the slowest the ${state.model.spacingM} m grid carries at this stage's band with ${p.minPointsPerWavelength} points per wavelength`,
            );
            state.model = raiseVs(state.model, stageBounds.vsMin, bounds.minVpVsRatio);
          }
          const atStart = await evaluate(ctx, state, prepared, shots, p, { sourceKind, component, output, cancelFlag }, state.model, true, `stage-${state.stage + 1}/start`);
          recordStageData(ctx, state.stage, shots, prepared, atStart, "start");
          const taper = pointTaper(state.model, shots.map((s) => ({ x: s.positions.sourceX, z: s.positions.sourceZ })), p.sourceTaperM);
          const receivers = new Map<string, { x: number; z: number }>();
          for (const s of shots) s.positions.receiverX.forEach((x, i) => receivers.set(`${x},${s.positions.receiverZ[i]}`, { x, z: s.positions.receiverZ[i] }));
          const rtaper = pointTaper(state.model, [...receivers.values()], p.receiverTaperM);
          for (let i = 0; i < taper.length; i++) taper[i] *= rtaper[i];
          const param: Parameterisation = {
            set: p.invertFor as InvertedSet,
            nx: state.model.nx,
            nz: state.model.nz,
            spacingM: state.model.spacingM,
            start: state.model,
            scale: buildScale(p.invertFor as InvertedSet, state.model, {
              illumination: p.preconditioning === "pseudo-hessian" ? atStart.illumination : null,
              stabilisation: p.stabilisation,
              fixed: fixedMask(state.model, p, shots),
              taper,
            }),
            smoothingCells: p.smoothingM / state.model.spacingM,
            bounds: stageBounds,
          };
          const x0 = new Float64Array(vectorLength(param));
          state.parameterisation = param;
          state.lbfgs = startLbfgs(x0, { f: atStart.misfit, g: vectorGradient(param, x0, atStart.gradient) });
          state.stageIteration = 0;
          state.previousMisfit = atStart.misfit;
          state.stageRecords.push({
            stage: state.stage + 1,
            lowPassHz: stage.lowPassHz,
            measure: stage.measure,
            iterations: 0,
            startMisfit: atStart.misfit,
            endMisfit: atStart.misfit,
            stoppedBy: "running",
            waveletFit,
            ...(withLastWavelet === undefined ? {} : { startMisfitWithLastWavelet: withLastWavelet }),
          });
          state.curve.push({ x: state.iteration, y: atStart.misfit, group });
          ctx.extendSeries({ name: "misfit", xLabel: "iteration", yLabel: "misfit" }, [{ x: state.iteration, y: atStart.misfit, group }]);
        }
        const record = state.stageRecords[state.stageRecords.length - 1];
        const param = state.parameterisation;
        if (stage.iterations === 0) {
          // A stage that only measures: its start is recorded, the model goes on unchanged.
          record.stoppedBy = "no iterations asked";
          state.stage++;
          state.parameterisation = null;
          state.lbfgs = null;
          ctx.saveCheckpoint(state);
          continue;
        }
        for (;;) {
          throwIfAborted(ctx.signal);
          const t0 = Date.now();
          const solvesBefore = state.forwardSolves;
          const evaluations: Array<{ x: Float64Array; result: EvaluationResult }> = [];
          // Names each line-search evaluation's batch of shot tasks (part of the task ids on the queue).
          const batchOf = (k: number) => `stage-${state.stage + 1}/iteration-${state.iteration + 1}/evaluation-${k}`;
          const step = await lbfgsIteration(
            state.lbfgs!,
            async (x) => {
              const result = await evaluate(ctx, state, prepared, shots, p, { sourceKind, component, output, cancelFlag }, modelFromVector(param, x), true, batchOf(evaluations.length + 1));
              evaluations.push({ x: Float64Array.from(x), result });
              return { f: result.misfit, g: vectorGradient(param, x, result.gradient) };
            },
            {
              memory: p.lbfgsMemory,
              maxEvaluations: p.maxLineSearchEvaluations,
              initialStep: firstStep(param, state.lbfgs!.g, p.firstStepFraction),
            },
          );
          const accepted = evaluations.find((e) => sameVector(e.x, step.state.x))?.result ?? null;
          const misfitBefore = state.previousMisfit ?? step.state.f;
          const relChange = misfitBefore > 0 ? (misfitBefore - step.state.f) / misfitBefore : 0;
          state.lbfgs = step.state;
          state.stageIteration++;
          state.iteration++;
          state.previousMisfit = step.state.f;
          record.iterations = state.stageIteration;
          record.endMisfit = step.state.f;
          state.model = modelFromVector(param, step.state.x);
          const meta = {
            stage: state.stage + 1,
            stageIteration: state.stageIteration,
            iteration: state.iteration,
            misfit: step.state.f,
            stepLength: step.stepLength,
            evaluations: step.evaluations,
            forwardSolves: state.forwardSolves - solvesBefore,
            wallS: (Date.now() - t0) / 1000,
            lowPassHz: stage.lowPassHz,
            measure: stage.measure,
          };
          const label = `stage ${state.stage + 1}, iteration ${state.stageIteration}`;
          ctx.recordIntermediate({ kind: "model", index: state.iteration, label, value: state.model, meta });
          if (accepted) {
            ctx.recordIntermediate({ kind: "gradient", index: state.iteration, label, value: gradientDocument(state.model, accepted.gradient, param.set), meta });
          }
          state.curve.push({ x: state.iteration, y: step.state.f, group });
          state.stepCurve.push({ x: state.iteration, y: step.stepLength, group });
          ctx.extendSeries({ name: "misfit", xLabel: "iteration", yLabel: "misfit" }, [{ x: state.iteration, y: step.state.f, group }]);
          ctx.extendSeries({ name: "step-length", xLabel: "iteration", yLabel: "step length" }, [{ x: state.iteration, y: step.stepLength, group }]);
          ctx.log.info(
            `stage ${state.stage + 1}/${p.stages.length} iteration ${state.stageIteration}: misfit ${step.state.f.toPrecision(4)} (${(100 * relChange).toFixed(1)} % lower), step ${step.stepLength.toPrecision(3)}, ${meta.forwardSolves} solves, ${meta.wallS.toFixed(1)} s`,
          );
          ctx.progress(
            Math.min(0.99, state.iteration / totalIterations),
            `stage ${state.stage + 1} of ${p.stages.length}, iteration ${state.stageIteration}: misfit ${step.state.f.toPrecision(4)}, step ${step.stepLength.toPrecision(3)}`,
          );
          let stoppedBy: string | null = null;
          if (step.stopped) stoppedBy = step.stopped;
          else if (state.stageIteration >= stage.iterations) stoppedBy = "iterations";
          else if (relChange < stage.stopBelowRelativeChange) stoppedBy = "relative change";
          if (stoppedBy) {
            record.stoppedBy = stoppedBy;
            if (accepted) recordStageData(ctx, state.stage, shots, prepared, accepted, "end");
            state.stage++;
            state.parameterisation = null;
            state.lbfgs = null;
            ctx.saveCheckpoint(state);
            break;
          }
          ctx.saveCheckpoint(state);
        }
      }
    } finally {
      ctx.signal.removeEventListener("abort", onAbort);
    }

    // The measure table: the starting and the final model under every stage's measure.
    const physics: Physics = { sourceKind, component, output, cancelFlag };
    if (p.measureTable) {
      state.measureRows ??= [];
      for (let k = state.measureRows.length; k < p.stages.length; k++) {
        throwIfAborted(ctx.signal);
        const stage = p.stages[k];
        const prepared = prepareStage(stage, shots, dt, ns);
        const misfitOf = async (model: ElasticModel, which: string): Promise<number> => {
          // The stage's first record already holds the starting model's misfit of stage 1.
          if (k === 0 && which === "start" && state.stageRecords[0]) return state.stageRecords[0].startMisfit;
          const base = startWavelets();
          const scratch: InversionCheckpoint = { ...state, model, wavelets: {} };
          for (const s of shots) scratch.wavelets[s.id] = lowPass(base[s.id], 1, waveletCount, dt, stage.lowPassHz, stage.filterOrder);
          if (stage.reestimateWavelet) await reestimate(ctx, scratch, prepared, shots, p, physics, `measure-table/stage-${k + 1}/${which}/wavelet`);
          const r = await evaluate(ctx, scratch, prepared, shots, p, physics, model, false, `measure-table/stage-${k + 1}/${which}`);
          state.forwardSolves = scratch.forwardSolves;
          return r.misfit;
        };
        const startModelMisfit = await misfitOf(startModel, "start");
        const finalModelMisfit = await misfitOf(state.model, "final");
        const row: MeasureRow = {
          stage: k + 1,
          lowPassHz: stage.lowPassHz,
          measure: stage.measure,
          startModelMisfit,
          finalModelMisfit,
          ratio: startModelMisfit > 0 ? finalModelMisfit / startModelMisfit : Number.NaN,
        };
        state.measureRows.push(row);
        ctx.log.info(
          `measure of stage ${k + 1} (${stage.lowPassHz} Hz, ${stage.measure}): starting model ${startModelMisfit.toPrecision(4)}, final model ${finalModelMisfit.toPrecision(4)} (${(100 * row.ratio).toFixed(0)} % of the start)`,
        );
        ctx.progress(0.99, `measuring the starting and final model with stage ${k + 1}'s measure`);
        ctx.saveCheckpoint(state);
      }
    }

    // Final synthetics in the last stage's band, for forward-model-like comparison.
    const lastStage = p.stages[p.stages.length - 1];
    const prepared = prepareStage(lastStage, shots, dt, ns);
    const final = await evaluate(ctx, state, prepared, shots, p, { sourceKind, component, output, cancelFlag }, state.model, false, "final");
    const synthetic: GatherSet = {
      kind: "gathers",
      gathers: shots.map((s, k) => ({ ...s.gather, traces: s.gather.traces.map((t) => ({ ...t, component, dead: false })), data: final.synthetics[k] })),
    };
    const elapsedS = (Date.now() - started) / 1000;
    return {
      outputs: {
        model: state.model,
        synthetic,
        report: {
          kind: "json",
          role: "inversion",
          data: {
            stages: state.stageRecords,
            iterations: state.iteration,
            forwardSolves: state.forwardSolves,
            shots: shots.map((s) => s.id),
            invertFor: p.invertFor,
            finalMisfit: final.misfit,
            measureTable: state.measureRows ?? [],
            perShotMisfit: shots.map((s, k) => ({ gatherId: s.id, sourceX: s.positions.sourceX, value: final.perShot[k] })),
          },
        },
      },
      summary: {
        stages: state.stageRecords.length,
        iterations: state.iteration,
        forwardSolves: state.forwardSolves,
        shots: shots.length,
        firstMisfit: state.stageRecords[0]?.startMisfit ?? null,
        lastMisfit: state.stageRecords[state.stageRecords.length - 1]?.endMisfit ?? null,
        ...Object.fromEntries((state.measureRows ?? []).map((r) => [`stage${r.stage}FinalToStartPercent`, Math.round(1000 * r.ratio) / 10])),
        secondsThisAttempt: Math.round(elapsedS),
      },
      series: [
        { name: "misfit", xLabel: "iteration", yLabel: "misfit", points: state.curve },
        { name: "step-length", xLabel: "iteration", yLabel: "step length", points: state.stepCurve },
      ],
    };
  },
});

/** A stage's filtered observed data, trace weights and window. */
interface PreparedStage {
  stage: InversionStage;
  observed: Float32Array[];
  weights: Float32Array[];
  window: { firstSample: number; endSample: number };
}

function prepareStage(stage: InversionStage, shots: ShotData[], dt: number, ns: number): PreparedStage {
  const t0 = shots[0].gather.startTimeS;
  const firstSample = Math.max(0, Math.min(ns, Math.round((stage.windowStartMs / 1000 - t0) / dt)));
  const endSample = stage.windowEndMs === undefined ? ns : Math.max(firstSample + 1, Math.min(ns, Math.round((stage.windowEndMs / 1000 - t0) / dt) + 1));
  return {
    stage,
    observed: shots.map((s) => lowPass(s.gather.data, s.gather.traces.length, ns, dt, stage.lowPassHz, stage.filterOrder)),
    weights: shots.map((s) =>
      Float32Array.from(s.gather.traces, (t, i) => {
        const off = Math.abs(t.receiverX - t.sourceX);
        return s.live[i] && off >= stage.minOffsetM && off <= stage.maxOffsetM ? 1 : 0;
      }),
    ),
    window: { firstSample, endSample },
  };
}

interface EvaluationResult {
  misfit: number;
  perShot: number[];
  gradient: { vp: Float64Array; vs: Float64Array; rho: Float64Array };
  illumination: Float64Array;
  synthetics: Float32Array[];
}

interface Physics {
  sourceKind: SourceKind;
  component: VelocityComponent;
  output: { intervalS: number; count: number; startTimeS: number };
  cancelFlag: Int32Array;
}

/**
 * Misfit (and gradient) of a model over every shot, on the shot executor (local pool or job queue);
 * sums in shot order, whatever order the shots finish in (deterministic). `batch` names the batch of
 * shot tasks within the step.
 */
async function evaluate(
  ctx: StepContext,
  state: InversionCheckpoint,
  prepared: PreparedStage,
  shots: ShotData[],
  p: WaveformInversionParams,
  physics: Physics,
  model: ElasticModel,
  wantGradient: boolean,
  batch: string,
): Promise<EvaluationResult> {
  const results: ShotGradientOutput[] = await shotExecutorOf(ctx).runShots(
    "shotGradientTask",
    shots.map((s, k) => {
      const task: ShotGradientInput = {
        model,
        shot: s.positions,
        simulation: {
          mode: p.mode,
          sourceKind: physics.sourceKind,
          component: physics.component,
          wavelet: { kind: "samples", samples: state.wavelets[s.id], intervalS: physics.output.intervalS, startTimeS: 0 },
          pmlCells: p.pmlCells,
          freeSurface: p.freeSurface,
          minPointsPerWavelength: p.minPointsPerWavelength,
        },
        output: physics.output,
        observed: prepared.observed[k],
        traceWeights: prepared.weights[k],
        window: prepared.window,
        measure: prepared.stage.measure,
        wantGradient,
        cancelFlag: physics.cancelFlag,
      };
      return { shotId: s.id, arg: task };
    }),
    { batch, signal: ctx.signal },
  );
  throwIfAborted(ctx.signal);
  const n = model.nx * model.nz;
  const gradient = { vp: new Float64Array(n), vs: new Float64Array(n), rho: new Float64Array(n) };
  const illumination = new Float64Array(n);
  let misfit = 0;
  for (const r of results) {
    misfit += r.misfit;
    state.forwardSolves += r.forwardSolves + r.adjointSolves;
    if (r.gradient) {
      for (let i = 0; i < n; i++) {
        gradient.vp[i] += r.gradient.vp[i];
        gradient.vs[i] += r.gradient.vs[i];
        gradient.rho[i] += r.gradient.rho[i];
      }
    }
    if (r.illumination) for (let i = 0; i < n; i++) illumination[i] += r.illumination[i];
  }
  return { misfit, perShot: results.map((r) => r.misfit), gradient, illumination, synthetics: results.map((r) => r.synthetic) };
}

/** Re-estimates each shot's wavelet in the stage band (Pratt 1999); returns the mean relative residual. */
async function reestimate(
  ctx: StepContext,
  state: InversionCheckpoint,
  prepared: PreparedStage,
  shots: ShotData[],
  p: WaveformInversionParams,
  physics: Physics,
  batch = `stage-${state.stage + 1}/wavelet`,
): Promise<number> {
  const { intervalS: dt, count: ns } = physics.output;
  const syn = await evaluate(ctx, state, prepared, shots, p, physics, state.model, false, batch);
  let fitSum = 0;
  shots.forEach((s, k) => {
    const est = estimateWavelet({
      observed: prepared.observed[k],
      synthetic: syn.synthetics[k],
      traceCount: s.gather.traces.length,
      sampleCount: ns,
      currentWavelet: state.wavelets[s.id],
      sampleIntervalS: dt,
      waterLevel: 0.01,
      weights: prepared.weights[k],
      firstSample: prepared.window.firstSample,
      endSample: prepared.window.endSample,
      taperMs: 5,
    });
    // Kept inside the stage's band (faded out from the corner to where the stage's low-pass is down
    // to 5 %): beyond it the data hold nothing to estimate from, and noise there would only lower
    // the slowest Vs the grid may carry in this stage.
    state.wavelets[s.id] = Float32Array.from(bandLimitWavelet(est.wavelet, dt, prepared.stage.lowPassHz, butterworthLevelHz(prepared.stage.lowPassHz, prepared.stage.filterOrder, 0.05)));
    fitSum += est.fit;
  });
  return fitSum / shots.length;
}

/**
 * The steepest-descent trial step for the optimiser (the largest change of a component of x along
 * −g, as lbfgsIteration takes it) whose largest model change is `fraction` of the parameter's
 * reference value. Used whenever the optimiser has no curvature pairs (a stage's first iteration).
 */
function firstStep(param: Parameterisation, g: Float64Array, fraction: number): number {
  const n = param.nx * param.nz;
  let gMax = 0;
  for (let i = 0; i < g.length; i++) gMax = Math.max(gMax, Math.abs(g[i]));
  let worst = 0;
  INVERTED_PARAMETERS[param.set].forEach((name, k) => {
    const d = param.scale[k];
    let ref = 0;
    for (let i = 0; i < n; i++) ref = Math.max(ref, d[i]);
    if (ref === 0) return;
    for (let i = 0; i < n; i++) worst = Math.max(worst, Math.abs(d[i] * g[k * n + i]) / ref);
  });
  // Along −g/max|g|·step, cell i of parameter k changes by step·d_i·|g_i|/max|g|.
  return worst > 0 ? (fraction * gMax) / worst : 1;
}

function sameVector(a: Float64Array, b: Float64Array): boolean {
  if (a.length !== b.length) return false;
  for (let i = 0; i < a.length; i++) if (a[i] !== b[i]) return false;
  return true;
}

/** A gradient as a drawable document on the model grid. */
function gradientDocument(model: ElasticModel, g: EvaluationResult["gradient"], set: InvertedSet) {
  const params = INVERTED_PARAMETERS[set];
  return {
    kind: "gradient" as const,
    nx: model.nx,
    nz: model.nz,
    spacingM: model.spacingM,
    originX: model.originX,
    originZ: model.originZ,
    parameters: [...params],
    vs: Float32Array.from(g.vs),
    ...(params.includes("vp") ? { vp: Float32Array.from(g.vp) } : {}),
    ...(params.includes("rho") ? { rho: Float32Array.from(g.rho) } : {}),
  };
}

/**
 * At the start of a stage: the wavelet of every shot that the stage models with (low-passed like
 * the data, re-estimated when the stage asks), one single-trace gather per shot on the wavelet's own
 * time axis (from −lead), as the intermediate result "wavelet" of index stage + 1.
 */
function recordStageWavelets(
  ctx: StepContext,
  stageIndex: number,
  stage: { lowPassHz: number; reestimateWavelet: boolean },
  shots: ShotData[],
  wavelets: Record<string, Float32Array>,
  dt: number,
  startTimeS: number,
  fit: number | undefined,
): void {
  const value: GatherSet = {
    kind: "gathers",
    gathers: shots.map((s) => {
      const data = Float32Array.from(wavelets[s.id]);
      const t = s.gather.traces[0];
      return {
        id: s.id,
        sampleIntervalS: dt,
        sampleCount: data.length,
        startTimeS,
        traces: [{ ...t, receiverX: t.sourceX, receiverZ: t.sourceZ, offset: 0, stackCount: 1, dead: false }],
        data,
      };
    }),
  };
  ctx.recordIntermediate({
    kind: "wavelet",
    index: stageIndex + 1,
    label: `stage ${stageIndex + 1} (${stage.lowPassHz} Hz)`,
    value,
    meta: { stage: stageIndex + 1, lowPassHz: stage.lowPassHz, reestimated: stage.reestimateWavelet, ...(fit === undefined ? {} : { meanRelativeResidual: fit }) },
  });
}

/**
 * At the start or the end of a stage: the observed traces in the stage's band and the synthetics
 * of every shot, as intermediate results ("observed", and "synthetic-start" or "synthetic" for the
 * end; index = stage). The observed ones are the same at both moments.
 */
function recordStageData(ctx: StepContext, stageIndex: number, shots: ShotData[], prepared: PreparedStage, result: EvaluationResult, when: "start" | "end"): void {
  const synthetic: GatherSet = {
    kind: "gathers",
    gathers: shots.map((s, k) => ({ ...s.gather, data: result.synthetics[k] })),
  };
  const observed: GatherSet = { kind: "gathers", gathers: shots.map((s, k) => ({ ...s.gather, data: prepared.observed[k] })) };
  const label = `${when} of stage ${stageIndex + 1} (${prepared.stage.lowPassHz} Hz)`;
  ctx.recordIntermediate({ kind: "observed", index: stageIndex + 1, label: `stage ${stageIndex + 1} (${prepared.stage.lowPassHz} Hz)`, value: observed });
  ctx.recordIntermediate({ kind: when === "start" ? "synthetic-start" : "synthetic", index: stageIndex + 1, label, value: synthetic });
}
