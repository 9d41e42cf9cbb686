/**
 * IBM System/360 hexadecimal floating point (single precision, 32 bits) to and from IEEE 754.
 *
 * Layout (IBM System/360 Principles of Operation, "Floating-Point Arithmetic"; the same layout
 * is given in SEG-Y rev 2.0, SEG 2017, appendix on data sample formats, format code 1):
 * bit 31 sign, bits 30..24 exponent in excess-64 notation with base 16, bits 23..0 a fraction
 * 0.F (six hexadecimal digits). Value = (-1)^sign · 0.F · 16^(exponent − 64).
 * Normalised numbers have a non-zero leading hexadecimal digit, so up to three leading bits of the
 * fraction can be zero: IBM single precision carries 21 to 24 significant bits.
 */

/** 16^(e − 64) for e = 0..127, exact in float64 (powers of two from 2^-256 to 2^252). */
const POW16 = new Float64Array(128);
for (let e = 0; e < 128; e++) POW16[e] = Math.pow(2, 4 * (e - 64));

/** Largest IBM single-precision magnitude, 0x7FFFFFFF = (1 − 16^−6) · 16^63 ≈ 7.237e75. */
export const IBM_MAX = (1 - Math.pow(16, -6)) * Math.pow(16, 63);

/**
 * Decodes one IBM single-precision word (given as an unsigned 32-bit integer) to a number.
 * Unnormalised words (leading hex digit zero) decode by the same formula.
 */
export function ibmToNumber(word: number): number {
  const sign = word >>> 31 ? -1 : 1;
  const exponent = (word >>> 24) & 0x7f;
  const fraction = word & 0x00ffffff;
  if (fraction === 0) return sign < 0 ? -0 : 0;
  // 0.F = fraction / 2^24
  return sign * fraction * 5.9604644775390625e-8 * POW16[exponent];
}

/**
 * Encodes a finite number as the nearest IBM single-precision word (unsigned 32-bit integer),
 * rounding the fraction half away from zero. Magnitudes beyond {@link IBM_MAX} and ±Infinity
 * saturate to the largest word; magnitudes below the smallest unnormalised value (16^−70)
 * become zero. NaN has no IBM encoding: RangeError.
 */
export function numberToIbm(value: number): number {
  if (Number.isNaN(value)) throw new RangeError(`numberToIbm: value is NaN; IBM floating point has no NaN`);
  const signBit = value < 0 || Object.is(value, -0) ? 0x80000000 : 0;
  const mag = Math.abs(value);
  if (mag === 0) return signBit >>> 0;
  if (mag >= IBM_MAX) return (signBit | 0x7fffffff) >>> 0;
  // Exponent e such that 16^(e−64) > mag ≥ 16^(e−65), i.e. fraction in [1/16, 1).
  let e = Math.floor(Math.log2(mag) / 4) + 65;
  // log2 rounding near exact powers: fix up so that the fraction lies in [1/16, 1).
  while (e > 0 && e <= 128 && mag < POW16[e - 1] / 16) e--;
  while (e >= 0 && e < 127 && mag >= POW16[e]) e++;
  if (e < 0) {
    // Below the smallest normalised value 16^−65: keep an unnormalised fraction with exponent 0.
    const small = Math.round((mag / POW16[0]) * 16777216);
    return (signBit | small) >>> 0;
  }
  let fraction = Math.round((mag / POW16[e]) * 16777216);
  if (fraction >= 16777216) {
    // Rounding carried into a seventh hex digit: renormalise.
    fraction = Math.round(fraction / 16);
    e++;
    if (e > 127) return (signBit | 0x7fffffff) >>> 0;
  }
  return (signBit | (e << 24) | fraction) >>> 0;
}

/**
 * Decodes `count` big- or little-endian IBM words starting at `byteOffset` into `out`.
 * The caller checks bounds.
 */
export function decodeIbmSamples(
  view: DataView,
  byteOffset: number,
  count: number,
  littleEndian: boolean,
  out: Float32Array,
  outOffset = 0,
): void {
  for (let i = 0; i < count; i++) out[outOffset + i] = ibmToNumber(view.getUint32(byteOffset + 4 * i, littleEndian));
}

/** Encodes samples as IBM words into `view` at `byteOffset`. */
export function encodeIbmSamples(
  samples: ArrayLike<number>,
  view: DataView,
  byteOffset: number,
  littleEndian: boolean,
): void {
  for (let i = 0; i < samples.length; i++) view.setUint32(byteOffset + 4 * i, numberToIbm(samples[i]), littleEndian);
}
