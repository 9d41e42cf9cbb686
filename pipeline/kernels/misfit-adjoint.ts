/**
 * Misfit measures with their adjoint sources: the derivative of the misfit with respect to each
 * synthetic sample, which the inversion injects time-reversed at the receivers (Tarantola 1984;
 * Plessix 2006, GJI 167, eq. 25 for least squares).
 *
 * Least squares here is J = ½ Σ_t w_t Σ_k (s_k − d_k)², so ∂J/∂s_k = w_t (s_k − d_k).
 * Samples outside [firstSample, endSample) and traces with weight 0 contribute nothing and get a
 * zero adjoint source. Layout of every block: flat `[trace][sample]`.
 */

/** Measures the inversion can minimise. */
export type InversionMeasure = "least-squares";

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
  const n = a.traceCount * a.sampleCount;
  if (!Number.isInteger(a.traceCount) || a.traceCount < 0) throw new RangeError(`traceCount must be a whole number ≥ 0, got ${a.traceCount}`);
  if (!Number.isInteger(a.sampleCount) || a.sampleCount < 0) throw new RangeError(`sampleCount must be a whole number ≥ 0, got ${a.sampleCount}`);
  if (a.synthetic.length !== n) throw new RangeError(`synthetic must hold ${n} samples, got ${a.synthetic.length}`);
  if (a.observed.length !== n) throw new RangeError(`observed must hold ${n} samples, got ${a.observed.length}`);
  if (a.weights && a.weights.length !== a.traceCount) throw new RangeError(`weights must hold ${a.traceCount} values, got ${a.weights.length}`);
  const first = a.firstSample ?? 0;
  const end = a.endSample ?? a.sampleCount;
  if (!(first >= 0 && end <= a.sampleCount && first <= end)) {
    throw new RangeError(`window [${first}, ${end}) must lie inside [0, ${a.sampleCount}]`);
  }
}

/** Misfit and adjoint source of a block of traces by `measure`. Inputs are not mutated. */
export function misfitAndAdjoint(a: MisfitAdjointArgs): MisfitAdjointResult {
  checkArgs(a);
  const { traceCount, sampleCount, synthetic, observed } = a;
  const first = a.firstSample ?? 0;
  const end = a.endSample ?? sampleCount;
  const traceMisfits = new Float64Array(traceCount);
  const adjoint = new Float32Array(traceCount * sampleCount);
  let misfit = 0;
  for (let t = 0; t < traceCount; t++) {
    const w = a.weights ? a.weights[t] : 1;
    if (w === 0) continue;
    const base = t * sampleCount;
    let j = 0;
    for (let k = first; k < end; k++) {
      const r = synthetic[base + k] - observed[base + k];
      j += r * r;
      adjoint[base + k] = w * r;
    }
    traceMisfits[t] = 0.5 * w * j;
    misfit += traceMisfits[t];
  }
  return { misfit, traceMisfits, adjoint };
}
