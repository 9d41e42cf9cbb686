/**
 * Band-limiting an estimated wavelet and the Butterworth level frequency, against closed forms:
 * a Ricker wavelet's spectrum (f/fp)² e^{−(f/fp)²} is negligible far above its peak, a
 * Gaussian-windowed tone's spectrum is a Gaussian around the tone, and a Butterworth low-pass is
 * down to 1/√2 exactly at its corner for every order (Butterworth 1930, "On the theory of filter
 * amplifiers", Wireless Engineer 7).
 */
import { describe, expect, it } from "vitest";
import { bandLimitWavelet, butterworthLevelHz, refilterWavelet } from "../../../pipeline/kernels/wavelet-estimation";
import { butterworthLowPass } from "../../../pipeline/kernels/butterworth";
import { filterTraces, planFrequencyFilter } from "../../../pipeline/kernels/filter";

const dt = 0.0005;
const n = 1024;
const ricker = (peakHz: number, t0: number) =>
  Float64Array.from({ length: n }, (_, k) => {
    const a = (Math.PI * peakHz * (k * dt - t0)) ** 2;
    return (1 - 2 * a) * Math.exp(-a);
  });
/** A 300 Hz tone under a Gaussian of σ = 10 ms: its spectrum is exp(−2π²σ²(f − 300)²), about 1e-19 at 150 Hz. */
const tone = Float64Array.from({ length: n }, (_, k) => Math.cos(2 * Math.PI * 300 * (k * dt - 0.25)) * Math.exp(-(((k * dt - 0.25) / 0.01) ** 2) / 2));
const energy = (a: ArrayLike<number>) => Array.from(a).reduce((s, v) => s + v * v, 0);

describe("bandLimitWavelet", () => {
  it("keeps a wavelet whose band lies below the pass frequency (a 10 Hz Ricker centred at 0.2 s, so nothing is cut off at t = 0; pass 100 Hz), sample for sample", () => {
    const w = ricker(10, 0.2);
    const out = bandLimitWavelet(w, dt, 100, 150);
    let worst = 0;
    for (let k = 0; k < n; k++) worst = Math.max(worst, Math.abs(out[k] - w[k]));
    expect(worst).toBeLessThan(1e-9);
  });

  it("removes energy above the stop frequency (a 300 Hz tone, stop 150 Hz) and keeps the wavelet beside it", () => {
    const w = ricker(10, 0.2);
    const mixed = w.map((v, k) => v + tone[k]);
    const out = bandLimitWavelet(mixed, dt, 100, 150);
    const rest = out.map((v, k) => v - w[k]);
    expect(energy(rest) / energy(tone)).toBeLessThan(1e-12);
  });

  it("halves a component at the middle of the taper (raised cosine: weight ½ at (pass + stop)/2)", () => {
    // A long Gaussian-windowed 125 Hz tone (σ = 40 ms) between pass 100 and stop 150 Hz: the Hann
    // weight is ½(1 + cos(π(f − 100)/50)), ½ with slope −π/100 per Hz at the tone. Its energy
    // spectrum is a Gaussian of variance 1/(8π²σ²) Hz², so to second order the amplitude ratio is
    // √(¼ + (π/100)² / (8π²σ²)).
    const sigma = 0.04;
    const t = Float64Array.from({ length: n }, (_, k) => Math.cos(2 * Math.PI * 125 * (k * dt - 0.256)) * Math.exp(-(((k * dt - 0.256) / sigma) ** 2) / 2));
    const out = bandLimitWavelet(t, dt, 100, 150);
    const expected = Math.sqrt(0.25 + (Math.PI / 100) ** 2 / (8 * Math.PI ** 2 * sigma ** 2));
    expect(Math.sqrt(energy(out) / energy(t))).toBeCloseTo(expected, 3);
  });

  it("refuses a stop frequency not above the pass frequency, naming it", () => {
    expect(() => bandLimitWavelet([1, 2, 3], dt, 50, 50)).toThrow(/stopHz/);
  });
});

describe("butterworthLevelHz", () => {
  it("puts the −3 dB point (1/√2) at the corner for every order (Butterworth 1930)", () => {
    for (const order of [1, 2, 4, 6, 8]) expect(butterworthLevelHz(36, order, Math.SQRT1_2)).toBeCloseTo(36, 9);
  });

  it("gives fc · 399^(1/12) ≈ 1.647 fc for the 5 % point of a 6th-order low-pass (|H| = 1/√(1 + (f/fc)^12))", () => {
    const f = butterworthLevelHz(36, 6, 0.05);
    expect(1 / Math.sqrt(1 + (f / 36) ** 12)).toBeCloseTo(0.05, 12);
    expect(f / 36).toBeCloseTo(1.647, 3);
  });
});

describe("refilterWavelet", () => {
  // A linear time-invariant filter commutes with convolution: a wavelet seen through one causal
  // low-pass and moved by H_to/H_from equals the same wavelet seen through the other (exact in
  // the band where |H_from| stays above the floor; a 15 Hz Ricker carries almost nothing beyond
  // 60 Hz, its spectrum (f/fp)² e^{−(f/fp)²} being 2e-6 of its peak there). The filters are the
  // cascades filterTraces runs (causal, forward only).
  const through = (w: Float64Array, hz: number) => {
    const plan = planFrequencyFilter({ passBand: "low-pass", lowCutHz: 0, highCutHz: hz, order: 6, zeroPhase: false, notchesHz: [], notchWidthHz: 1 }, dt, n);
    return filterTraces({ data: Float32Array.from(w), traceCount: 1, sampleCount: n, plan, taperSamples: 0 });
  };
  const relL2 = (a: ArrayLike<number>, b: ArrayLike<number>) => Math.sqrt(energy(Array.from(a, (v, k) => v - b[k])) / energy(b));

  it("moves a wavelet from a 40 Hz to a 28 Hz low-pass (order 6) as if filtered at 28 Hz in the first place, within 1e-3", () => {
    const w = ricker(15, 0.15);
    const moved = refilterWavelet(through(w, 40), dt, butterworthLowPass(6, 40, 1 / dt), butterworthLowPass(6, 28, 1 / dt), 1e-4);
    expect(relL2(moved, through(w, 28))).toBeLessThan(1e-3);
  });

  it("leaves a wavelet unchanged when both filters are the same", () => {
    const w = through(ricker(15, 0.15), 30);
    const f = butterworthLowPass(6, 30, 1 / dt);
    expect(relL2(refilterWavelet(w, dt, f, f, 1e-4), w)).toBeLessThan(1e-6);
  });
});
