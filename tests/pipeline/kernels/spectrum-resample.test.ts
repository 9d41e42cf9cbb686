import { describe, expect, it } from "vitest";
import { amplitudeSpectra, meanSpectrum } from "../../../pipeline/kernels/spectrum";
import { interpolateTraces, resampleTraces, shiftTraces } from "../../../pipeline/kernels/resample";
import { seededRandom } from "../../helpers/random";

describe("amplitude spectra", () => {
  it("a sine on a frequency bin peaks at A·D/2 at its frequency (continuous Fourier amplitude, handbook)", () => {
    const n = 1024;
    const dt = 0.001;
    const f0 = 125 / (n * dt); // exactly on bin 125
    const a = 3;
    const data = new Float32Array(n);
    for (let i = 0; i < n; i++) data[i] = a * Math.sin(2 * Math.PI * f0 * i * dt);
    const { frequenciesHz, perTrace } = amplitudeSpectra(data, 1, n, dt, 0);
    expect(frequenciesHz.length).toBe(513); // 0 … Nyquist
    expect(frequenciesHz[512]).toBeCloseTo(500, 4);
    expect(frequenciesHz[125]).toBeCloseTo(f0, 4);
    expect(perTrace[125]).toBeCloseTo((a * n * dt) / 2, 4);
    expect(perTrace[124]).toBeLessThan(1e-4);
  });

  it("obeys Parseval's theorem: Σ|X_k|² = N Σ x² (discrete Fourier transform identity)", () => {
    const n = 512;
    const dt = 0.002;
    const data = seededRandom(8).fillGaussian(new Float32Array(n));
    const { perTrace } = amplitudeSpectra(data, 1, n, dt, 0);
    let energyT = 0;
    for (const x of data) energyT += x * x;
    // One-sided spectrum: bins 1 … N/2−1 count twice, DC and Nyquist once.
    let energyF = 0;
    for (let k = 0; k <= n / 2; k++) energyF += (k === 0 || k === n / 2 ? 1 : 2) * (perTrace[k] / dt) ** 2;
    expect(energyF / (n * energyT)).toBeCloseTo(1, 5);
  });

  it("averages only the included traces and limits the axis", () => {
    const n = 256;
    const data = seededRandom(9).fillGaussian(new Float32Array(3 * n));
    const { frequenciesHz, perTrace } = amplitudeSpectra(data, 3, n, 0.001, 0.05, 100);
    const nf = frequenciesHz.length;
    expect(frequenciesHz[nf - 1]).toBeLessThanOrEqual(100);
    const mean = meanSpectrum(perTrace, 3, nf, [true, false, true]);
    expect(mean[10]).toBeCloseTo((perTrace[10] + perTrace[2 * nf + 10]) / 2, 5);
  });
});

describe("time windows and resampling", () => {
  const dt = 0.00025;
  const n = 4000;
  const signal = (t: number) => Math.sin(2 * Math.PI * 30 * t) + 0.5 * Math.cos(2 * Math.PI * 80 * t + 0.3);

  it("shifts by whole samples and pads with zeros", () => {
    const data = Float32Array.of(1, 2, 3, 4, 5, 6);
    expect(Array.from(shiftTraces(data, 2, 3, 1, 3))).toEqual([2, 3, 0, 5, 6, 0]);
    expect(Array.from(shiftTraces(data, 2, 3, -1, 2))).toEqual([0, 1, 0, 4]);
  });

  it("down-samples a band-limited signal to 2 ms and matches it at the new sample times", () => {
    const data = new Float32Array(n);
    for (let i = 0; i < n; i++) data[i] = signal(i * dt);
    const out = resampleTraces(data, 1, n, 0, dt, { startTimeS: 0.1, sampleIntervalS: 0.002, sampleCount: 400 });
    let worst = 0;
    for (let j = 0; j < 350; j++) worst = Math.max(worst, Math.abs(out[j] - signal(0.1 + j * 0.002)));
    // The anti-alias low-pass (200 Hz corner, order 6, zero-phase) passes 80 Hz at
    // |H|² = 1/(1 + 0.4^12)² ≈ 1 − 3e-5 (handbook formula); the windowed sinc adds ~1e-4.
    expect(worst).toBeLessThan(2e-3);
  });

  it("removes content above the new Nyquist instead of folding it back", () => {
    const data = new Float32Array(n);
    for (let i = 0; i < n; i++) data[i] = Math.sin(2 * Math.PI * 400 * i * dt); // aliases to 100 Hz at 2 ms
    const grid = { startTimeS: 0.1, sampleIntervalS: 0.002, sampleCount: 400 };
    const filtered = resampleTraces(data, 1, n, 0, dt, grid);
    const naive = interpolateTraces(data, 1, n, 0, dt, grid); // what picking every 8th sample would do
    const rms = (a: Float32Array) => Math.sqrt(a.subarray(0, 350).reduce((s, x) => s + x * x, 0) / 350);
    expect(rms(naive)).toBeGreaterThan(0.6); // ≈ 1/√2: the aliased sine
    // Order-6 zero-phase at 400 Hz vs a 200 Hz corner: |H|² = 1/(1 + 2^12) ≈ 2.4e-4.
    expect(rms(filtered)).toBeLessThan(1e-3);
  });

  it("up-samples a 50 Hz sine from 2 ms to 0.5 ms with sinc interpolation", () => {
    const m = 500;
    const coarse = new Float32Array(m);
    for (let i = 0; i < m; i++) coarse[i] = Math.sin(2 * Math.PI * 50 * i * 0.002);
    const out = resampleTraces(coarse, 1, m, 0, 0.002, { startTimeS: 0.2, sampleIntervalS: 0.0005, sampleCount: 1000 });
    let worst = 0;
    for (let j = 0; j < 1000; j++) worst = Math.max(worst, Math.abs(out[j] - Math.sin(2 * Math.PI * 50 * (0.2 + j * 0.0005))));
    expect(worst).toBeLessThan(2e-3);
  });
});
