/**
 * Band-limited resampling of regularly sampled signals (windowed-sinc interpolation, Lanczos
 * window; common practice). When the output interval is longer than the input interval the kernel
 * is widened to the output's Nyquist frequency, so it also acts as the anti-alias filter.
 */

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
