/**
 * Misfit measures with their adjoint sources: the derivative of the misfit with respect to each
 * synthetic sample, which the inversion injects time-reversed at the receivers (Tarantola 1984;
 * Plessix 2006, GJI 167, eq. 25 for least squares).
 *
 * Per trace t with weight w_t, sums over the samples k of the window [firstSample, endSample)
 * (not multiplied by the sample interval), ŝ = s/‖s‖ and d̂ = d/‖d‖ with norms over the window:
 * - "least-squares": J = ½ w Σ (s − d)²,  ∂J/∂s = w (s − d).
 * - "trace-normalised-least-squares": J = ½ w Σ (ŝ − d̂)²,
 *   ∂J/∂s = w (r − (r·ŝ) ŝ)/‖s‖ with r = ŝ − d̂, which equals −w (d̂ − (ŝ·d̂) ŝ)/‖s‖.
 * - "normalised-correlation": J = w (1 − ŝ·d̂) (Choi & Alkhalifah 2012, Geophys. Prosp. 60, the
 *   per-trace term of the global correlation objective shifted by one), ∂J/∂s = −w (d̂ − (ŝ·d̂) ŝ)/‖s‖.
 *   Since ½‖ŝ − d̂‖² = 1 − ŝ·d̂, this and the trace-normalised least squares are the same function;
 *   both are kept because they are separate settings of the misfit step.
 * - "envelope": J = ½ w Σ (E_s − E_d)², E = √(x² + H[x]²) the envelope of the analytic signal
 *   (Bozdağ, Trampert & Tromp 2011, GJI 185; Wu, Luo & Wu 2014, Geophysics 79),
 *   ∂J/∂s = w [(ΔE/E_s)·s − H[(ΔE/E_s)·H[s]]], ΔE = E_s − E_d, zero outside the window.
 *   The minus sign comes from the discrete Hilbert transform of ./hilbert.ts being antisymmetric
 *   (Hᵀ = −H: its multiplier −i·sign(f) is odd and the padding/truncation pair is a transpose
 *   pair); the finite-difference test confirms it. Envelopes are computed on the whole trace (as in
 *   ./misfit.ts), so this adjoint source is not zero outside the window: H spreads it. E_s is
 *   floored at ENVELOPE_FLOOR × the trace's largest envelope value, where the derivative of E is
 *   undefined (E = 0).
 *
 * Values agree with ./misfit.ts `traceMisfits` (same ½ factors): "least-squares" with
 * `normaliseTraces: false`, "trace-normalised-least-squares" with `normaliseTraces: true`,
 * "normalised-correlation" and "envelope" as they are there, times the trace weight.
 * A synthetic trace with no energy in the window cannot be normalised: like misfit.ts it counts as
 * zero (ŝ = 0, so J = ½‖d̂‖² or 1), with a zero adjoint source (the derivative is undefined there).
 *
 * Traces with weight 0 contribute nothing and get a zero adjoint source. Layout of every block:
 * flat `[trace][sample]`. Arithmetic is float64; the adjoint source is returned as float32.
 */
import { analyticSignalInto, createAnalyticSignalPlan, type AnalyticSignalPlan } from "./hilbert";

/** Measures the inversion can minimise. */
export type InversionMeasure = "least-squares" | "trace-normalised-least-squares" | "normalised-correlation" | "envelope";

export const INVERSION_MEASURES: readonly InversionMeasure[] = [
  "least-squares",
  "trace-normalised-least-squares",
  "normalised-correlation",
  "envelope",
] as const;

/** Floor on the synthetic envelope, relative to the trace's largest envelope value (envelope measure). */
export const ENVELOPE_FLOOR = 1e-6;

/** Arguments of {@link misfitAndAdjoint}. */
export interface MisfitAdjointArgs {
  measure: InversionMeasure;
  /** Synthetic samples `[trace][sample]`. */
  synthetic: Float32Array;
  /** Observed samples `[trace][sample]`, same layout and sampling. */
  observed: Float32Array;
  traceCount: number;
  sampleCount: number;
  /** Per-trace weight (0 leaves a trace out). @default all 1 */
  weights?: Float32Array;
  /** First sample of the window. @default 0 */
  firstSample?: number;
  /** One past the last sample of the window. @default sampleCount */
  endSample?: number;
}

/** Total misfit, one value per trace, and the adjoint source `[trace][sample]`. */
export interface MisfitAdjointResult {
  misfit: number;
  traceMisfits: Float64Array;
  adjoint: Float32Array;
}

function checkArgs(a: MisfitAdjointArgs): void {
  if (!INVERSION_MEASURES.includes(a.measure)) throw new RangeError(`measure must be one of ${INVERSION_MEASURES.join(", ")}, got ${String(a.measure)}`);
  if (!Number.isInteger(a.traceCount) || a.traceCount < 0) throw new RangeError(`traceCount must be a whole number ≥ 0, got ${a.traceCount}`);
  if (!Number.isInteger(a.sampleCount) || a.sampleCount < 0) throw new RangeError(`sampleCount must be a whole number ≥ 0, got ${a.sampleCount}`);
  const n = a.traceCount * a.sampleCount;
  if (a.synthetic.length !== n) throw new RangeError(`synthetic must hold ${n} samples, got ${a.synthetic.length}`);
  if (a.observed.length !== n) throw new RangeError(`observed must hold ${n} samples, got ${a.observed.length}`);
  if (a.weights && a.weights.length !== a.traceCount) throw new RangeError(`weights must hold ${a.traceCount} values, got ${a.weights.length}`);
  if (a.weights) for (let t = 0; t < a.traceCount; t++) if (!(a.weights[t] >= 0 && Number.isFinite(a.weights[t]))) throw new RangeError(`weights[${t}] must be a number ≥ 0, got ${a.weights[t]}`);
  const first = a.firstSample ?? 0;
  const end = a.endSample ?? a.sampleCount;
  if (!(Number.isInteger(first) && Number.isInteger(end) && first >= 0 && end <= a.sampleCount && first <= end)) {
    throw new RangeError(`window [${first}, ${end}) must be whole sample numbers inside [0, ${a.sampleCount}]`);
  }
}

/** Work buffers of the envelope measure, one trace long (float64). */
interface EnvelopeWork {
  plan: AnalyticSignalPlan;
  hs: Float64Array;
  envS: Float64Array;
  hd: Float64Array;
  ratio: Float64Array;
  hRatio: Float64Array;
}

/** Misfit and adjoint source of a block of traces by `measure`. Inputs are not mutated. */
export function misfitAndAdjoint(a: MisfitAdjointArgs): MisfitAdjointResult {
  checkArgs(a);
  const { traceCount, sampleCount, synthetic, observed, measure } = a;
  const first = a.firstSample ?? 0;
  const end = a.endSample ?? sampleCount;
  const traceMisfits = new Float64Array(traceCount);
  const adjoint = new Float32Array(traceCount * sampleCount);
  let env: EnvelopeWork | null = null;
  if (measure === "envelope" && traceCount > 0 && sampleCount > 0) {
    const plan = createAnalyticSignalPlan(sampleCount);
    const buf = () => new Float64Array(sampleCount);
    env = { plan, hs: buf(), envS: buf(), hd: buf(), ratio: buf(), hRatio: buf() };
  }
  let misfit = 0;
  for (let t = 0; t < traceCount; t++) {
    const w = a.weights ? a.weights[t] : 1;
    if (w === 0) continue;
    const base = t * sampleCount;
    let j: number;
    if (measure === "least-squares") j = leastSquaresTrace(synthetic, observed, base, first, end, w, adjoint);
    else if (measure === "envelope") j = env ? envelopeTrace(env, synthetic, observed, base, first, end, w, adjoint) : 0;
    else j = normalisedTrace(measure, synthetic, observed, base, first, end, w, adjoint);
    traceMisfits[t] = w * j;
    misfit += traceMisfits[t];
  }
  return { misfit, traceMisfits, adjoint };
}

function leastSquaresTrace(syn: Float32Array, obs: Float32Array, base: number, first: number, end: number, w: number, adj: Float32Array): number {
  let j = 0;
  for (let k = base + first; k < base + end; k++) {
    const r = syn[k] - obs[k];
    j += r * r;
    adj[k] = w * r;
  }
  return 0.5 * j;
}

/** Trace-normalised least squares or normalised correlation of one trace; returns the unweighted J. */
function normalisedTrace(
  measure: InversionMeasure,
  syn: Float32Array,
  obs: Float32Array,
  base: number,
  first: number,
  end: number,
  w: number,
  adj: Float32Array,
): number {
  let ss = 0;
  let dd = 0;
  let sd = 0;
  for (let k = base + first; k < base + end; k++) {
    ss += syn[k] * syn[k];
    dd += obs[k] * obs[k];
    sd += syn[k] * obs[k];
  }
  const normS = Math.sqrt(ss);
  const ks = ss > 0 ? 1 / normS : 0;
  const kd = dd > 0 ? 1 / Math.sqrt(dd) : 0;
  // ŝ·d̂ clamped to the Cauchy–Schwarz bound, as in misfit.ts.
  const c = Math.max(-1, Math.min(1, sd * ks * kd));
  let j: number;
  if (measure === "normalised-correlation") j = 1 - c;
  else {
    // Sum of squared differences of the scaled samples keeps small misfits accurate (misfit.ts does the same).
    j = 0;
    for (let k = base + first; k < base + end; k++) {
      const r = syn[k] * ks - obs[k] * kd;
      j += r * r;
    }
    j *= 0.5;
  }
  if (ss > 0) {
    // ∂J/∂s = −(d̂ − (ŝ·d̂) ŝ)/‖s‖ for both measures (Choi & Alkhalifah 2012).
    const scale = w * ks;
    for (let k = base + first; k < base + end; k++) adj[k] = -scale * (obs[k] * kd - c * syn[k] * ks);
  }
  return j;
}

/** Envelope misfit of one trace; returns the unweighted J and writes w·∂J/∂s over the whole trace. */
function envelopeTrace(
  e: EnvelopeWork,
  syn: Float32Array,
  obs: Float32Array,
  base: number,
  first: number,
  end: number,
  w: number,
  adj: Float32Array,
): number {
  const n = e.plan.sampleCount;
  analyticSignalInto(e.plan, syn, base, null, e.hs);
  analyticSignalInto(e.plan, obs, base, null, e.hd);
  let peak = 0;
  for (let k = 0; k < n; k++) {
    e.envS[k] = Math.hypot(syn[base + k], e.hs[k]);
    if (e.envS[k] > peak) peak = e.envS[k];
  }
  const floor = ENVELOPE_FLOOR * peak;
  let j = 0;
  // ratio = ΔE/E_s inside the window, zero outside; ratio·H[s] goes into hRatio's input.
  e.ratio.fill(0);
  for (let k = first; k < end; k++) {
    const eo = Math.hypot(obs[base + k], e.hd[k]);
    const de = e.envS[k] - eo;
    j += de * de;
    e.ratio[k] = de / Math.max(e.envS[k], floor);
  }
  if (peak === 0) return 0.5 * j;
  for (let k = 0; k < n; k++) e.hd[k] = e.ratio[k] * e.hs[k];
  analyticSignalInto(e.plan, e.hd, 0, null, e.hRatio);
  for (let k = 0; k < n; k++) adj[base + k] = w * (e.ratio[k] * syn[base + k] - e.hRatio[k]);
  return 0.5 * j;
}
