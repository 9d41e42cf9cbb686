/**
 * Time windows and resampling of trace blocks (`[trace][sample]`).
 *
 * Resampling evaluates each trace at the new sample times by band-limited (sinc) interpolation
 * with a Hann-tapered sinc of ±16 input samples (Whittaker–Shannon interpolation, windowed:
 * common practice). Before going to a longer interval the traces pass a zero-phase Butterworth
 * low-pass (anti-alias filter) below the new Nyquist frequency, so content above it is removed
 * rather than folded back.
 *
 * Single signals (solver traces, source wavelets) use {@link resampleBandLimited}, a Lanczos-
 * windowed sinc whose width follows the longer of the two intervals (anti-alias included), and
 * its exact transpose {@link resampleBandLimitedTranspose}.
 */
import { filterTraces, planFrequencyFilter } from "./filter";
import { assertCount, assertFinite, assertTraceBlock } from "./taper";

/** Half-width of the interpolation kernel, input samples. */
export const SINC_HALF_WIDTH = 16;

/** Output time axis. */
export interface TimeGrid {
  /** Time of the first output sample after the source instant, s. */
  startTimeS: number;
  sampleIntervalS: number;
  sampleCount: number;
}

/**
 * Copies the samples of an output grid that shares the input's sample interval and is offset by
 * a whole number of samples (`shift` = index of output sample 0 in the input); samples outside
 * the input are zero.
 */
export function shiftTraces(data: Float32Array, traceCount: number, sampleCount: number, shift: number, outCount: number): Float32Array {
  assertTraceBlock(data, traceCount, sampleCount);
  if (!Number.isInteger(shift)) throw new RangeError(`shift must be an integer, got ${shift}`);
  assertCount("outCount", outCount);
  const out = new Float32Array(traceCount * outCount);
  const lo = Math.max(0, -shift);
  const hi = Math.min(outCount, sampleCount - shift);
  for (let t = 0; t < traceCount; t++) {
    if (hi > lo) out.set(data.subarray(t * sampleCount + lo + shift, t * sampleCount + hi + shift), t * outCount + lo);
  }
  return out;
}

/**
 * Evaluates each trace on `grid` by windowed-sinc interpolation (no anti-alias filtering here:
 * see {@link resampleTraces}). Output samples farther than the kernel from the input are zero.
 */
export function interpolateTraces(
  data: Float32Array,
  traceCount: number,
  sampleCount: number,
  startTimeS: number,
  sampleIntervalS: number,
  grid: TimeGrid,
): Float32Array {
  assertTraceBlock(data, traceCount, sampleCount);
  assertFinite("startTimeS", startTimeS);
  if (!(sampleIntervalS > 0)) throw new RangeError(`sampleIntervalS must be positive, got ${sampleIntervalS}`);
  if (!(grid.sampleIntervalS > 0)) throw new RangeError(`grid.sampleIntervalS must be positive, got ${grid.sampleIntervalS}`);
  assertFinite("grid.startTimeS", grid.startTimeS);
  assertCount("grid.sampleCount", grid.sampleCount);
  const m = grid.sampleCount;
  const width = 2 * SINC_HALF_WIDTH;
  // Kernel weights depend only on the output sample, not the trace: compute them once.
  const first = new Int32Array(m);
  const weights = new Float64Array(m * width);
  for (let j = 0; j < m; j++) {
    const x = (grid.startTimeS + j * grid.sampleIntervalS - startTimeS) / sampleIntervalS; // fractional input index
    const i0 = Math.floor(x) - SINC_HALF_WIDTH + 1;
    first[j] = i0;
    for (let k = 0; k < width; k++) {
      const d = x - (i0 + k);
      const hann = Math.abs(d) >= SINC_HALF_WIDTH ? 0 : 0.5 * (1 + Math.cos((Math.PI * d) / SINC_HALF_WIDTH));
      weights[j * width + k] = sinc(d) * hann;
    }
  }
  const out = new Float32Array(traceCount * m);
  for (let t = 0; t < traceCount; t++) {
    const base = t * sampleCount;
    for (let j = 0; j < m; j++) {
      let s = 0;
      const i0 = first[j];
      for (let k = 0; k < width; k++) {
        const i = i0 + k;
        if (i >= 0 && i < sampleCount) s += weights[j * width + k] * data[base + i];
      }
      out[t * m + j] = s;
    }
  }
  return out;
}

/**
 * Resamples traces onto `grid`. When the new interval is longer, a zero-phase Butterworth
 * low-pass of `antiAliasOrder` at `antiAliasFraction` × the new Nyquist frequency runs first.
 */
export function resampleTraces(
  data: Float32Array,
  traceCount: number,
  sampleCount: number,
  startTimeS: number,
  sampleIntervalS: number,
  grid: TimeGrid,
  antiAliasFraction = 0.8,
  antiAliasOrder = 6,
): Float32Array {
  assertTraceBlock(data, traceCount, sampleCount);
  assertFinite("antiAliasFraction", antiAliasFraction);
  if (!(antiAliasFraction > 0 && antiAliasFraction < 1)) throw new RangeError(`antiAliasFraction must lie in (0, 1), got ${antiAliasFraction}`);
  let source = data;
  if (grid.sampleIntervalS > sampleIntervalS * (1 + 1e-9)) {
    const corner = (antiAliasFraction * 0.5) / grid.sampleIntervalS;
    const plan = planFrequencyFilter(
      { passBand: "low-pass", lowCutHz: 0, highCutHz: corner, order: antiAliasOrder, zeroPhase: true, notchesHz: [], notchWidthHz: 1 },
      sampleIntervalS,
      sampleCount,
    );
    source = filterTraces({ data, traceCount, sampleCount, plan, taperSamples: 0 });
  }
  return interpolateTraces(source, traceCount, sampleCount, startTimeS, sampleIntervalS, grid);
}

// ---- Band-limited resampling of single signals (the solver's traces and source wavelets) ----
//
// Windowed-sinc interpolation with a Lanczos window (common practice). When the output interval is
// longer than the input interval the kernel is widened to the output's Nyquist frequency, so it
// also acts as the anti-alias filter. The solver records at its time step and brings the traces to
// the field sampling with it; the inversion injects adjoint sources through its transpose.

/** Lanczos window half-width in units of the kernel's sample period. */
export const LANCZOS_LOBES = 8;

function sinc(x: number): number {
  if (x === 0) return 1;
  const px = Math.PI * x;
  return Math.sin(px) / px;
}

/**
 * Resamples `src` (sample k at time `srcStartS + k·srcDtS`) to `count` samples at
 * `dstStartS + k·dstDtS`, writing into `out` (offset `outOffset`). Samples outside the input span
 * count as zero. Returns `out`.
 */
export function resampleBandLimited(
  src: ArrayLike<number>,
  srcStartS: number,
  srcDtS: number,
  dstStartS: number,
  dstDtS: number,
  count: number,
  out: Float32Array | Float64Array = new Float32Array(count),
  outOffset = 0,
  srcOffset = 0,
  srcLength = src.length - srcOffset,
): Float32Array | Float64Array {
  if (!(srcDtS > 0)) throw new RangeError(`srcDtS must be > 0, got ${srcDtS}`);
  if (!(dstDtS > 0)) throw new RangeError(`dstDtS must be > 0, got ${dstDtS}`);
  if (!Number.isInteger(count) || count < 0) throw new RangeError(`count must be an integer ≥ 0, got ${count}`);
  if (out.length < outOffset + count) throw new RangeError(`out too short: ${out.length} < ${outOffset + count}`);
  const period = Math.max(srcDtS, dstDtS);
  const gain = srcDtS / period;
  const halfWidth = LANCZOS_LOBES * period;
  for (let k = 0; k < count; k++) {
    const t = dstStartS + k * dstDtS;
    const lo = Math.max(0, Math.ceil((t - halfWidth - srcStartS) / srcDtS));
    const hi = Math.min(srcLength - 1, Math.floor((t + halfWidth - srcStartS) / srcDtS));
    let s = 0;
    for (let n = lo; n <= hi; n++) {
      const x = (t - (srcStartS + n * srcDtS)) / period;
      s += src[srcOffset + n] * sinc(x) * sinc(x / LANCZOS_LOBES);
    }
    out[outOffset + k] = s * gain;
  }
  return out;
}

/**
 * {@link resampleBandLimited} of `traceCount` traces at once, flat `[trace][sample]` on both sides
 * (`srcLength` input samples per trace), the weights computed once per output sample: the same
 * float64 operations in the same order, so the same samples.
 */
export function resampleBandLimitedTraces(
  src: ArrayLike<number>,
  srcStartS: number,
  srcDtS: number,
  dstStartS: number,
  dstDtS: number,
  count: number,
  out: Float32Array | Float64Array,
  srcLength: number,
  traceCount: number,
): Float32Array | Float64Array {
  if (!(srcDtS > 0)) throw new RangeError(`srcDtS must be > 0, got ${srcDtS}`);
  if (!(dstDtS > 0)) throw new RangeError(`dstDtS must be > 0, got ${dstDtS}`);
  if (!Number.isInteger(count) || count < 0) throw new RangeError(`count must be an integer ≥ 0, got ${count}`);
  if (out.length < traceCount * count) throw new RangeError(`out too short: ${out.length} < ${traceCount * count}`);
  if (src.length < traceCount * srcLength) throw new RangeError(`src too short: ${src.length} < ${traceCount * srcLength}`);
  const period = Math.max(srcDtS, dstDtS);
  const gain = srcDtS / period;
  const halfWidth = LANCZOS_LOBES * period;
  const span = 2 * Math.ceil(halfWidth / srcDtS) + 2;
  const w1 = new Float64Array(span);
  const w2 = new Float64Array(span);
  for (let k = 0; k < count; k++) {
    const t = dstStartS + k * dstDtS;
    const lo = Math.max(0, Math.ceil((t - halfWidth - srcStartS) / srcDtS));
    const hi = Math.min(srcLength - 1, Math.floor((t + halfWidth - srcStartS) / srcDtS));
    for (let n = lo; n <= hi; n++) {
      const x = (t - (srcStartS + n * srcDtS)) / period;
      w1[n - lo] = sinc(x);
      w2[n - lo] = sinc(x / LANCZOS_LOBES);
    }
    for (let tr = 0; tr < traceCount; tr++) {
      const base = tr * srcLength;
      let s = 0;
      for (let n = lo; n <= hi; n++) s += src[base + n] * w1[n - lo] * w2[n - lo];
      out[tr * count + k] = s * gain;
    }
  }
  return out;
}

/**
 * Transpose of {@link resampleBandLimited} as a linear map from `srcLength` input samples to
 * `count` output samples, for `traceCount` traces at once: adds to `srcOut[t·srcLength + n]` the
 * sum over output samples k of weight(k, n)·`dst[t·count + k]`, with exactly the weights the
 * forward map uses (computed once per output sample). The inversion injects an adjoint source
 * given at the output sampling through it, so the gradient is that of the resampled traces (the
 * adjoint of a linear operator is its transpose).
 */
export function resampleBandLimitedTranspose(
  dst: ArrayLike<number>,
  srcStartS: number,
  srcDtS: number,
  dstStartS: number,
  dstDtS: number,
  count: number,
  srcOut: Float64Array | Float32Array,
  srcLength: number,
  traceCount = 1,
): Float64Array | Float32Array {
  if (!(srcDtS > 0)) throw new RangeError(`srcDtS must be > 0, got ${srcDtS}`);
  if (!(dstDtS > 0)) throw new RangeError(`dstDtS must be > 0, got ${dstDtS}`);
  if (!Number.isInteger(count) || count < 0) throw new RangeError(`count must be an integer ≥ 0, got ${count}`);
  if (dst.length < traceCount * count) throw new RangeError(`dst too short: ${dst.length} < ${traceCount * count}`);
  if (srcOut.length < traceCount * srcLength) throw new RangeError(`srcOut too short: ${srcOut.length} < ${traceCount * srcLength}`);
  const period = Math.max(srcDtS, dstDtS);
  const gain = srcDtS / period;
  const halfWidth = LANCZOS_LOBES * period;
  const weights = new Float64Array(2 * Math.ceil(halfWidth / srcDtS) + 2);
  for (let k = 0; k < count; k++) {
    const t = dstStartS + k * dstDtS;
    const lo = Math.max(0, Math.ceil((t - halfWidth - srcStartS) / srcDtS));
    const hi = Math.min(srcLength - 1, Math.floor((t + halfWidth - srcStartS) / srcDtS));
    for (let n = lo; n <= hi; n++) {
      const x = (t - (srcStartS + n * srcDtS)) / period;
      weights[n - lo] = gain * sinc(x) * sinc(x / LANCZOS_LOBES);
    }
    for (let tr = 0; tr < traceCount; tr++) {
      const a = dst[tr * count + k];
      if (a === 0) continue;
      const base = tr * srcLength;
      for (let n = lo; n <= hi; n++) srcOut[base + n] += a * weights[n - lo];
    }
  }
  return srcOut;
}
