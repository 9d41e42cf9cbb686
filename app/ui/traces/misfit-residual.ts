/**
 * Observed against synthetic on the scale the misfit step uses (pipeline/steps/misfit.ts,
 * pipeline/kernels/misfit.ts), so that "difference" draws exactly what the misfit measures.
 *
 * - Least squares with normalised traces and the normalised correlation: each trace is divided
 *   by its L2 norm over the compared window, ô = o/‖o‖, ŝ = s/‖s‖. The misfit of a trace is then
 *   ½ Σ (ŝ − ô)² (least squares, Tarantola 1984, traces normalised), which equals 1 − ĉ with
 *   ĉ = s·o/(‖s‖‖o‖) (Choi & Alkhalifah 2012), since ‖ŝ‖ = ‖ô‖ = 1. The residual drawn is ô − ŝ
 *   inside the window and zero outside it.
 * - Least squares without normalisation: the residual is o − s as recorded (data units).
 * - Envelope: the step compares Hilbert envelopes; the residual drawn is still the waveform
 *   difference of the normalised traces, and the panel says so.
 */
import type { GatherView } from "./draw-traces";

export type MisfitMeasureName = "least-squares" | "normalised-correlation" | "envelope";

/** The settings of the misfit step that decide what is compared. */
export interface MisfitSettings {
  measure: MisfitMeasureName;
  /** Least squares only (ignored by the other measures). */
  normaliseTraces: boolean;
  windowStartMs?: number | null;
  windowEndMs?: number | null;
}

/** The misfit step's window rule (pipeline/steps/misfit.ts windowSamples): samples [first, end) inside [start, end] ms, clamped. */
export function windowOf(g: Pick<GatherView, "samples" | "dtS" | "t0S">, startMs?: number | null, endMs?: number | null): { first: number; end: number } {
  const startS = startMs === undefined || startMs === null ? null : startMs / 1000;
  const endS = endMs === undefined || endMs === null ? null : endMs / 1000;
  const first = startS === null ? 0 : Math.max(0, Math.ceil((startS - g.t0S) / g.dtS - 1e-6));
  const end = endS === null ? g.samples : Math.min(g.samples, Math.floor((endS - g.t0S) / g.dtS + 1e-6) + 1);
  return { first, end: Math.max(first, end) };
}

export interface ResidualPanels {
  observed: GatherView;
  synthetic: GatherView;
  /** Observed minus synthetic on the common scale, zero outside the window. */
  residual: GatherView;
  /** One amplitude that all three panels share (the largest |value| of the scaled observed gather). */
  reference: number;
  /** True when traces were divided by their L2 norm over the window. */
  normalised: boolean;
  window: { first: number; end: number };
  /** Per trace: ½ Σ residual² over the window (the least-squares misfit of the scaled traces). */
  perTrace: Float64Array;
  /** What the panels show, in words for the panel. */
  note: string;
}

function scaled(g: GatherView, first: number, end: number, normalise: boolean): Float32Array {
  const out = new Float32Array(g.data.length);
  for (let t = 0; t < g.traces; t++) {
    const base = t * g.samples;
    let k = 1;
    if (normalise) {
      let ss = 0;
      for (let i = first; i < end; i++) ss += g.data[base + i] * g.data[base + i];
      k = ss > 0 ? 1 / Math.sqrt(ss) : 0;
    }
    for (let i = 0; i < g.samples; i++) out[base + i] = g.data[base + i] * k;
  }
  return out;
}

/** The three panels of observed, synthetic and their difference on the misfit's common scale. Throws RangeError when the gathers differ in size. */
export function misfitPanels(obs: GatherView, syn: GatherView, m: MisfitSettings): ResidualPanels {
  if (obs.traces !== syn.traces || obs.samples !== syn.samples) {
    throw new RangeError(`observed ${obs.traces}×${obs.samples} and synthetic ${syn.traces}×${syn.samples} differ in size`);
  }
  const normalised = m.measure !== "least-squares" || m.normaliseTraces;
  const window = windowOf(obs, m.windowStartMs, m.windowEndMs);
  const o = scaled(obs, window.first, window.end, normalised);
  const s = scaled(syn, window.first, window.end, normalised);
  const d = new Float32Array(o.length);
  const perTrace = new Float64Array(obs.traces);
  let reference = 0;
  for (let t = 0; t < obs.traces; t++) {
    const base = t * obs.samples;
    let sum = 0;
    for (let i = window.first; i < window.end; i++) {
      const v = o[base + i] - s[base + i];
      d[base + i] = v;
      sum += v * v;
    }
    perTrace[t] = 0.5 * sum;
    for (let i = 0; i < obs.samples; i++) reference = Math.max(reference, Math.abs(o[base + i]));
  }
  const win =
    window.first === 0 && window.end === obs.samples
      ? "over the whole trace"
      : `over ${Math.round((obs.t0S + window.first * obs.dtS) * 1000)} to ${Math.round((obs.t0S + (window.end - 1) * obs.dtS) * 1000)} ms`;
  const note = normalised
    ? `Each trace divided by its L2 norm ${win}, as the misfit step (${m.measure}) compares them: the difference is what the misfit measures (½ Σ difference² per trace${m.measure === "normalised-correlation" ? " = 1 − correlation" : ""}).${m.measure === "envelope" ? " This run's misfit compares envelopes; the difference drawn is of the waveforms." : ""} All three panels share one amplitude scale.`
    : `Traces as recorded (least squares without normalisation) ${win}: the difference is what the misfit measures, in data units. All three panels share one amplitude scale.`;
  return {
    observed: { ...obs, data: o },
    synthetic: { ...syn, data: s },
    residual: { ...obs, data: d },
    reference: reference || 1,
    normalised,
    window,
    perTrace,
    note,
  };
}
