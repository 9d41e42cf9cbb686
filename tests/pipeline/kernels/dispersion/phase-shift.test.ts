import { describe, expect, it } from "vitest";
import { addPhaseShiftImage, evenAxis, normalisePerFrequency, phaseShiftImage, unitSpectra } from "../../../../pipeline/kernels/dispersion/phase-shift";
import { seededRandom } from "../../../helpers/random";

const DT = 0.001;

/** Ricker wavelet of peak frequency fp, Hz, centred at 0 (Ricker 1953). */
const ricker = (t: number, fp: number) => {
  const a = (Math.PI * fp * t) ** 2;
  return (1 - 2 * a) * Math.exp(-a);
};

/** A gather `[trace][sample]` of `distances.length` traces filled by fill(distance, time). */
function gather(distances: number[], ns: number, fill: (x: number, t: number) => number): Float32Array {
  const data = new Float32Array(distances.length * ns);
  distances.forEach((x, r) => {
    for (let i = 0; i < ns; i++) data[r * ns + i] = fill(x, i * DT);
  });
  return data;
}

const argmaxRow = (image: Float32Array, q: number, nc: number) => {
  let best = 0;
  for (let j = 1; j < nc; j++) if (image[q * nc + j] > image[q * nc + best]) best = j;
  return best;
};

describe("phase-shift dispersion image (Park, Miller & Xia 1998)", () => {
  it("peaks at a plane wave's phase velocity within the velocity step at every frequency of its band", () => {
    // u(x, t) = w(t − x/c0): U(x, ω) = W(ω)·e^{−iωx/c0}, so |Σ e^{iωx/c}·U/|U|| = |Σ e^{iωx(1/c − 1/c0)}|,
    // which is N at c = c0 and smaller elsewhere (closed form). c0 lies between two trial velocities.
    const c0 = 237.3;
    const distances = Array.from({ length: 24 }, (_, i) => 3 + 2 * i);
    const ns = 1024;
    const data = gather(distances, ns, (x, t) => ricker(t - 0.08 - x / c0, 30));
    const axes = { frequenciesHz: evenAxis(10, 70, 1, "frequency"), velocitiesMps: evenAxis(100, 500, 2, "velocity") };
    const image = phaseShiftImage([{ data, sampleCount: ns, sampleIntervalS: DT, startTimeS: 0, traceRows: distances.map((_, i) => i), distancesM: distances }], axes, false);
    const nc = axes.velocitiesMps.length;
    for (let q = 0; q < axes.frequenciesHz.length; q++) {
      const j = argmaxRow(image, q, nc);
      expect(Math.abs(axes.velocitiesMps[j] - c0), `${axes.frequenciesHz[q]} Hz`).toBeLessThanOrEqual(2);
      // One coherent shot: the peak is at most 1 (mean of unit phasors) and near it here.
      expect(image[q * nc + j]).toBeLessThanOrEqual(1 + 1e-6);
      expect(image[q * nc + j]).toBeGreaterThan(0.95);
    }
  });

  it("peaks at a prescribed c(f) for a dispersive wave summed from frequency components (exact DFT bins)", () => {
    // Components at multiples of 1/T (T the record length) are orthogonal over the record, so the
    // DFT at those frequencies sees each one alone: U(x, f) ∝ e^{−i2πfx/c(f)} exactly.
    const ns = 1000;
    const T = ns * DT;
    const cOf = (f: number) => 140 + 260 * Math.exp(-f / 12);
    const freqs = Array.from({ length: 30 }, (_, k) => (8 + 2 * k) / T);
    const distances = Array.from({ length: 30 }, (_, i) => 4 + 1.5 * i);
    const rnd = seededRandom(7);
    const phases = freqs.map(() => 2 * Math.PI * rnd.uniform());
    const data = gather(distances, ns, (x, t) => freqs.reduce((s, f, k) => s + Math.cos(2 * Math.PI * f * (t - x / cOf(f)) + phases[k]), 0));
    const axes = { frequenciesHz: Float64Array.from(freqs), velocitiesMps: evenAxis(100, 450, 1, "velocity") };
    const image = phaseShiftImage([{ data, sampleCount: ns, sampleIntervalS: DT, startTimeS: 0, traceRows: distances.map((_, i) => i), distancesM: distances }], axes, true);
    const nc = axes.velocitiesMps.length;
    freqs.forEach((f, q) => {
      const j = argmaxRow(image, q, nc);
      expect(Math.abs(axes.velocitiesMps[j] - cOf(f)), `${f} Hz`).toBeLessThanOrEqual(1);
      // Normalised per frequency: the row maximum is 1.
      expect(image[q * nc + j]).toBeCloseTo(1, 6);
    });
  });

  it("stacks shots as a mean of their images and ignores trace amplitudes (unit spectra)", () => {
    const c0 = 180;
    const ns = 800;
    const distances = Array.from({ length: 16 }, (_, i) => 5 + 2 * i);
    const rnd = seededRandom(11);
    const gains = distances.map(() => 0.1 + 5 * rnd.uniform());
    const a = gather(distances, ns, (x, t) => ricker(t - 0.05 - x / c0, 25));
    const b = gather(distances, ns, (x, t) => gains[distances.indexOf(x)] * ricker(t - 0.05 - x / c0, 25));
    const axes = { frequenciesHz: evenAxis(10, 50, 2, "frequency"), velocitiesMps: evenAxis(100, 300, 1, "velocity") };
    const one = (data: Float32Array) => ({ data, sampleCount: ns, sampleIntervalS: DT, startTimeS: 0, traceRows: distances.map((_, i) => i), distancesM: distances });
    const single = phaseShiftImage([one(a)], axes, false);
    const scaled = phaseShiftImage([one(b)], axes, false);
    const stacked = phaseShiftImage([one(a), one(b)], axes, false);
    for (let i = 0; i < single.length; i++) {
      // Float32 samples: the unit spectra agree to about 1e-6.
      expect(Math.abs(single[i] - scaled[i])).toBeLessThan(1e-5);
      expect(Math.abs(single[i] - stacked[i])).toBeLessThan(1e-5);
    }
  });

  it("unit spectra match a direct DFT and refuse frequencies above Nyquist", () => {
    const ns = 64;
    const rnd = seededRandom(5);
    const data = Float64Array.from({ length: ns }, () => rnd.gaussian());
    const f = 125;
    const s = unitSpectra(data, ns, DT, 0.01, [0], [f]);
    let re = 0;
    let im = 0;
    for (let n = 0; n < ns; n++) {
      const t = 0.01 + n * DT;
      re += data[n] * Math.cos(2 * Math.PI * f * t);
      im -= data[n] * Math.sin(2 * Math.PI * f * t);
    }
    const a = Math.hypot(re, im);
    expect(s[0]).toBeCloseTo(re / a, 10);
    expect(s[1]).toBeCloseTo(im / a, 10);
    expect(() => unitSpectra(data, ns, DT, 0, [0], [600])).toThrow(/frequenciesHz\[0\]/);
    expect(() => addPhaseShiftImage(new Float64Array(2), [1], { frequenciesHz: new Float64Array([10]), velocitiesMps: new Float64Array([0]) }, new Float64Array(1))).toThrow(/velocitiesMps\[0\]/);
    expect(() => evenAxis(10, 5, 1, "frequency")).toThrow(RangeError);
    const img = new Float64Array([1, 2, 4, 0, 0, 0]);
    normalisePerFrequency(img, 2, 3);
    expect(Array.from(img)).toEqual([0.25, 0.5, 1, 0, 0, 0]);
  });
});
