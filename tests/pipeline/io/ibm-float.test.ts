import { describe, expect, it } from "vitest";
import { IBM_MAX, decodeIbmSamples, encodeIbmSamples, ibmToNumber, numberToIbm } from "../../../pipeline/io/ibm-float";
import { seededRandom } from "../../helpers/random";

describe("IBM hexadecimal floating point", () => {
  it("decodes and encodes the worked example -118.625 = 0xC276A000", () => {
    // Source: Wikipedia, "IBM hexadecimal floating-point" (worked example: -118.625 is
    // 0xC276A000: sign 1, exponent 0x42 = 66 → 16^2, fraction 0x76A000 = 0.76A₁₆). Exact.
    expect(ibmToNumber(0xc276a000)).toBe(-118.625);
    expect(numberToIbm(-118.625)).toBe(0xc276a000);
  });

  it("handles values that follow from the definition value = 0.F · 16^(e−64)", () => {
    // IBM System/360 Principles of Operation (floating-point data format); exact by definition.
    const cases: Array<[number, number]> = [
      [0x41100000, 1], // 0.1₁₆ · 16^1
      [0x40800000, 0.5], // 0.8₁₆ · 16^0
      [0xc1100000, -1],
      [0x42100000, 16],
      [0x42640000, 100], // 0.64₁₆ · 16^2 = 100
      [0x3f100000, 1 / 256], // 0.1₁₆ · 16^-1
    ];
    for (const [word, value] of cases) {
      expect(ibmToNumber(word)).toBe(value);
      expect(numberToIbm(value)).toBe(word);
    }
  });

  it("handles zero of either sign", () => {
    expect(ibmToNumber(0)).toBe(0);
    expect(numberToIbm(0)).toBe(0);
    expect(numberToIbm(-0)).toBe(0x80000000);
    // A zero fraction with any exponent is a zero (Principles of Operation: "true zero" has all
    // bits zero; other zero-fraction words still have value zero).
    expect(ibmToNumber(0x45000000)).toBe(0);
  });

  it("handles the largest and smallest normalised magnitudes", () => {
    // Wikipedia, "IBM hexadecimal floating-point": largest 0x7FFFFFFF ≈ 7.2370051 × 10^75,
    // smallest positive normalised 0x00100000 ≈ 5.397605 × 10^−79. Relative tolerance 1e-7
    // matches the 8 significant figures quoted.
    expect(ibmToNumber(0x7fffffff) / 7.2370051e75).toBeCloseTo(1, 7);
    expect(ibmToNumber(0xffffffff) / -7.2370051e75).toBeCloseTo(1, 7);
    expect(ibmToNumber(0x00100000) / 5.397605e-79).toBeCloseTo(1, 6);
    expect(numberToIbm(IBM_MAX)).toBe(0x7fffffff);
    expect(numberToIbm(Infinity)).toBe(0x7fffffff);
    expect(numberToIbm(-Infinity)).toBe(0xffffffff);
    expect(numberToIbm(1e80)).toBe(0x7fffffff);
    expect(numberToIbm(Math.pow(16, -65))).toBe(0x00100000);
  });

  it("decodes unnormalised (denormal-like) words and keeps tiny values unnormalised", () => {
    // By definition: 0x00000001 = 16^-6 · 16^-64 = 16^-70; 0x00010000 = 16^-2 · 16^-64.
    expect(ibmToNumber(0x00000001)).toBe(Math.pow(16, -70));
    expect(ibmToNumber(0x00010000)).toBe(Math.pow(16, -66));
    expect(numberToIbm(Math.pow(16, -70))).toBe(0x00000001);
    expect(numberToIbm(Math.pow(16, -66))).toBe(0x00010000);
    expect(numberToIbm(Math.pow(16, -72))).toBe(0); // below half the smallest step
  });

  it("rounds every float32 to within half a unit of the 21-bit worst-case precision", () => {
    // Hexadecimal normalisation leaves 21 to 24 significant bits (Principles of Operation), so
    // rounding to nearest errs by at most 2^-21 relative. Seeded random float32 values over
    // 60 decades.
    const rnd = seededRandom(11);
    for (let i = 0; i < 5000; i++) {
      const v = Math.fround((rnd.uniform() < 0.5 ? -1 : 1) * Math.pow(10, 60 * rnd.uniform() - 30));
      const back = ibmToNumber(numberToIbm(v));
      expect(Math.abs(back - v) / Math.abs(v)).toBeLessThanOrEqual(Math.pow(2, -21));
    }
  });

  it("rejects NaN with a RangeError", () => {
    expect(() => numberToIbm(NaN)).toThrow(RangeError);
  });

  it("encodes and decodes sample arrays in both byte orders", () => {
    const samples = new Float32Array([-118.625, 1, 0.5, 0]);
    for (const little of [false, true]) {
      const buf = new DataView(new ArrayBuffer(16));
      encodeIbmSamples(samples, buf, 0, little);
      // First word laid out as the worked example: C2 76 A0 00 big-endian (Wikipedia, as above).
      const firstBytes = [0, 1, 2, 3].map((k) => buf.getUint8(k));
      expect(firstBytes).toEqual(little ? [0x00, 0xa0, 0x76, 0xc2] : [0xc2, 0x76, 0xa0, 0x00]);
      const out = new Float32Array(4);
      decodeIbmSamples(buf, 0, 4, little, out);
      expect(Array.from(out)).toEqual(Array.from(samples));
    }
  });
});
