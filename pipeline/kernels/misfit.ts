/**
 * Trace-by-trace misfit between synthetic and observed trace blocks (`[trace][sample]`, same
 * layout and sampling), over a window of samples.
 *
 * Measures (sums run over the samples of the window; not multiplied by the sample interval):
 * - "least-squares": ½ Σ (s − o)² (Tarantola 1984, Geophysics 49); with trace normalisation each
 *   trace is first divided by its L2 norm over the window, so the value lies in [0, 2].
 * - "normalised-correlation": 1 − ĉ with ĉ = s·o / (‖s‖ ‖o‖), the per-trace term of the global
 *   normalised cross-correlation objective (Choi & Alkhalifah 2012, Geophysical Prospecting 60),
 *   shifted by one so a perfect fit is 0, a polarity reversal 2, and every value in [0, 2]
 *   (Cauchy–Schwarz). Blind to the amplitude of either trace.
 * - "envelope": ½ Σ (E_s − E_o)² with E the envelope of the analytic signal (Bozdağ, Trampert &
 *   Tromp 2011, Geophys. J. Int. 185). Envelopes are computed on the whole trace, then compared in
 *   the window, so the window edges do not disturb the Hilbert transform.
 *
 * A trace with no energy in the window cannot be normalised: it stays zero, so for
 * "normalised-correlation" (and normalised least squares) it counts as uncorrelated (ĉ = 0).
 */
import { createAnalyticSignalPlan, envelopeInto } from "./hilbert";
import { assertTraceBlock } from "./taper";

/** The misfit measures. */
export type MisfitMeasure = "least-squares" | "normalised-correlation" | "envelope";

export const MISFIT_MEASURES: readonly MisfitMeasure[] = ["least-squares", "normalised-correlation", "envelope"] as const;

function assertWindow(length: number, first: number, end: number): void {
  if (!Number.isInteger(first) || first < 0 || first > length) throw new RangeError(`first must be an integer in [0, ${length}], got ${String(first)}`);
  if (!Number.isInteger(end) || end < first || end > length) throw new RangeError(`end must be an integer in [${first}, ${length}], got ${String(end)}`);
}

/**
 * Least-squares misfit ½ Σ (s − o)² of `syn[first … end)` and `obs[first … end)`.
 * @param normalise divide each trace by its L2 norm over the window first (zero traces stay zero)
 */
export function leastSquaresMisfit(syn: ArrayLike<number>, obs: ArrayLike<number>, first = 0, end = syn.length, normalise = false): number {
  if (syn.length !== obs.length) throw new RangeError(`syn and obs must have one length, got ${syn.length} and ${obs.length}`);
  assertWindow(syn.length, first, end);
  if (!normalise) return directSquares(syn, obs, first, end);
  let ss = 0;
  let oo = 0;
  for (let i = first; i < end; i++) {
    ss += syn[i] * syn[i];
    oo += obs[i] * obs[i];
  }
  // Summing the differences of the scaled samples (rather than 1 − ĉ) keeps small misfits accurate.
  const ks = ss > 0 ? 1 / Math.sqrt(ss) : 0;
  const ko = oo > 0 ? 1 / Math.sqrt(oo) : 0;
  let sum = 0;
  for (let i = first; i < end; i++) {
    const d = syn[i] * ks - obs[i] * ko;
    sum += d * d;
  }
  return 0.5 * sum;
}

function directSquares(syn: ArrayLike<number>, obs: ArrayLike<number>, first: number, end: number): number {
  let sum = 0;
  for (let i = first; i < end; i++) {
    const d = syn[i] - obs[i];
    sum += d * d;
  }
  return 0.5 * sum;
}

/**
 * Normalised correlation coefficient ĉ = s·o / (‖s‖ ‖o‖) of `syn[first … end)` and
 * `obs[first … end)`, in [−1, 1]; 0 when either trace has no energy in the window.
 */
export function normalisedCorrelation(syn: ArrayLike<number>, obs: ArrayLike<number>, first = 0, end = syn.length): number {
  if (syn.length !== obs.length) throw new RangeError(`syn and obs must have one length, got ${syn.length} and ${obs.length}`);
  assertWindow(syn.length, first, end);
  let ss = 0;
  let oo = 0;
  let so = 0;
  for (let i = first; i < end; i++) {
    const s = syn[i];
    const o = obs[i];
    ss += s * s;
    oo += o * o;
    so += s * o;
  }
  if (ss === 0 || oo === 0) return 0;
  // Rounding can push |ĉ| a hair past 1 for identical traces; clamp to the Cauchy–Schwarz bound.
  return Math.max(-1, Math.min(1, so / Math.sqrt(ss * oo)));
}

/** Per-trace misfits of two trace blocks. */
export interface TraceMisfitArgs {
  /** Synthetic samples `[trace][sample]`. */
  synthetic: Float32Array | Float64Array;
  /** Observed samples `[trace][sample]`, same layout. */
  observed: Float32Array | Float64Array;
  traceCount: number;
  sampleCount: number;
  measure: MisfitMeasure;
  /** Least squares only: divide each trace by its L2 norm over the window first. @default true */
  normaliseTraces?: boolean;
  /** First sample of the window. @default 0 */
  firstSample?: number;
  /** One past the last sample of the window. @default sampleCount */
  endSample?: number;
  /** Per trace: compare (1) or skip (0). @default all compared */
  include?: Uint8Array;
  /** Output, one value per trace; skipped traces get NaN. */
  out?: Float64Array;
}

/**
 * Misfit of each trace of `synthetic` against the same trace of `observed` by `measure`
 * (see the module comment). Returns one value per trace (NaN where `include` is 0). Inputs are
 * not mutated.
 */
export function traceMisfits(args: TraceMisfitArgs): Float64Array {
  const { synthetic, observed, traceCount, sampleCount, measure } = args;
  assertTraceBlock(synthetic, traceCount, sampleCount);
  if (observed.length !== synthetic.length) throw new RangeError(`observed must hold ${synthetic.length} samples like synthetic, got ${observed.length}`);
  if (!MISFIT_MEASURES.includes(measure)) throw new RangeError(`measure must be one of ${MISFIT_MEASURES.join(", ")}, got ${String(measure)}`);
  const normalise = args.normaliseTraces ?? true;
  const first = args.firstSample ?? 0;
  const end = args.endSample ?? sampleCount;
  assertWindow(sampleCount, first, end);
  if (args.include && args.include.length !== traceCount) throw new RangeError(`include must hold ${traceCount} flags, got ${args.include.length}`);
  const out = args.out ?? new Float64Array(traceCount);
  if (out.length !== traceCount) throw new RangeError(`out must hold ${traceCount} values, got ${out.length}`);

  const plan = measure === "envelope" && traceCount > 0 && sampleCount > 0 ? createAnalyticSignalPlan(sampleCount) : null;
  const envS = plan ? new Float64Array(sampleCount) : null;
  const envO = plan ? new Float64Array(sampleCount) : null;
  for (let t = 0; t < traceCount; t++) {
    if (args.include && args.include[t] === 0) {
      out[t] = Number.NaN;
      continue;
    }
    const base = t * sampleCount;
    const s = synthetic.subarray(base, base + sampleCount);
    const o = observed.subarray(base, base + sampleCount);
    if (measure === "least-squares") out[t] = leastSquaresMisfit(s, o, first, end, normalise);
    else if (measure === "normalised-correlation") out[t] = 1 - normalisedCorrelation(s, o, first, end);
    else if (plan && envS && envO) {
      envelopeInto(plan, s, 0, envS);
      envelopeInto(plan, o, 0, envO);
      out[t] = directSquares(envS, envO, first, end);
    } else out[t] = 0;
  }
  return out;
}
