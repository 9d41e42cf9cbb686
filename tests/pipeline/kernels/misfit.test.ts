import { describe, expect, it } from "vitest";
import { createAnalyticSignalPlan, envelopeInto, hilbertTransform, traceEnvelopes } from "../../../pipeline/kernels/hilbert";
import { leastSquaresMisfit, normalisedCorrelation, traceMisfits } from "../../../pipeline/kernels/misfit";
import { seededRandom } from "../../helpers/random";

/** Ricker wavelet (1 − 2a²t²) e^(−a²t²), a = π·peakHz. */
function ricker(t: number, peakHz: number): number {
  const a2 = (Math.PI * peakHz * t) ** 2;
  return (1 - 2 * a2) * Math.exp(-a2);
}

/**
 * Autocorrelation R(τ) = ∫ r(t) r(t + τ) dt of the Ricker wavelet above, in closed form.
 * Derivation: r = −g''/(2a²) with g = e^(−a²t²); the autocorrelation of g is
 * G(τ) = √(π/2)/a · e^(−a²τ²/2) (Gaussian integral), and the autocorrelation of g'' is G''''
 * (two integrations by parts), so R = G''''/(4a⁴). The fourth derivative of e^(−bτ²) is
 * b²·H₄(√b τ)·e^(−bτ²) with the Hermite polynomial H₄(x) = 16x⁴ − 48x² + 12 (Abramowitz & Stegun,
 * Handbook of Mathematical Functions, 22.3.16 / 22.11.7). With b = a²/2:
 * R(τ) = (3/4)·√(π/2)/a · (1 − 2a²τ² + a⁴τ⁴/3) · e^(−a²τ²/2); R(0) = 3√(2π)/(8a).
 */
function rickerAutocorrelation(tauS: number, peakHz: number): number {
  const a = Math.PI * peakHz;
  const x = (a * tauS) ** 2;
  return 0.75 * (Math.sqrt(Math.PI / 2) / a) * (1 - 2 * x + (x * x) / 3) * Math.exp(-x / 2);
}

describe("Hilbert transform and envelope", () => {
  // Sign convention: H[u](t) = (1/π) p.v.∫ u(τ)/(t − τ) dτ (kernel 1/(πt)), under which
  // H[sin ωt] = −cos ωt and H[cos ωt] = sin ωt for ω > 0 (Wikipedia, "Hilbert transform", table of
  // selected Hilbert transforms). Bracewell (The Fourier Transform and Its Applications) defines the
  // transform with the opposite sign, so in his tables H[sin] = +cos: stated by that table's footnote
  // and by Weisstein, MathWorld "Hilbert Transform", whose table follows Bracewell (1999) and names
  // the 1/(πt) convention as the other common one (NIST DLMF eq. 1.14.41; King 2009, Hilbert
  // Transforms, vol. 2, p. 6). Read from those two pages, not from the books themselves.
  it("turns sin into −cos (kernel 1/(πt) convention; Bracewell's sign is the opposite)", () => {
    const n = 512;
    const x = new Float64Array(n);
    const minusCos = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      x[i] = Math.sin((2 * Math.PI * 13 * i) / n);
      minusCos[i] = -Math.cos((2 * Math.PI * 13 * i) / n);
    }
    // A whole number of periods in an unpadded transform: the discrete result is exact up to
    // rounding (measured 6.8e-15); tolerance 1e-12.
    const periodic = hilbertTransform(x, n);
    let err = 0;
    for (let i = 0; i < n; i++) err = Math.max(err, Math.abs(periodic[i] - minusCos[i]));
    expect(err).toBeLessThan(1e-12);
    // Default padding (finite trace, zero outside): the truncated 1/(πt) kernel leaves an error that
    // falls off away from the ends; in the middle half measured 0.0173 (13 periods), tolerance 0.02.
    const padded = hilbertTransform(x);
    let mid = 0;
    for (let i = n / 4; i < (3 * n) / 4; i++) mid = Math.max(mid, Math.abs(padded[i] - minusCos[i]));
    expect(mid).toBeLessThan(0.02);
    expect(mid).toBeGreaterThan(1e-4); // the finite-trace effect is real, not hidden by the padding
  });

  it("envelope of a cosine is 1 (analytic signal e^(iωt), Bracewell)", () => {
    const n = 256;
    const x = new Float32Array(n);
    for (let i = 0; i < n; i++) x[i] = Math.cos((2 * Math.PI * 10 * i) / n + 0.3);
    const plan = createAnalyticSignalPlan(n, n);
    const env = new Float64Array(n);
    envelopeInto(plan, x, 0, env);
    // Float32 input rounding (6e-8) bounds the error; measured 3.7e-8, tolerance 5e-7.
    let err = 0;
    for (let i = 0; i < n; i++) err = Math.max(err, Math.abs(env[i] - 1));
    expect(err).toBeLessThan(5e-7);
  });

  it("envelope of A·cos(ωt)·g(t) with a slow Gaussian g is A·g (Bedrosian 1963, Proc. IEEE 51, product theorem)", () => {
    // dt 1 ms, 60 Hz carrier, Gaussian σ = 40 ms centred at 0.5 s: the Gaussian's spectrum
    // (σ_f = 1/(2πσ) ≈ 4 Hz) lies far below 60 Hz, so H[g·cos] = g·sin to within e^(−(60/4)²/2).
    const n = 1000;
    const dt = 0.001;
    const amp = 2.5;
    const data = new Float32Array(2 * n);
    const want = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      const t = i * dt;
      const g = Math.exp(-((t - 0.5) ** 2) / (2 * 0.04 ** 2));
      want[i] = amp * g;
      data[i] = amp * Math.cos(2 * Math.PI * 60 * t) * g;
      data[n + i] = -data[i]; // polarity does not change an envelope
    }
    const env = traceEnvelopes(data, 2, n);
    // The Gaussian is below 1e-30 at the ends, so there are no edge effects to avoid; the error is
    // Float32 input rounding: measured 4.5e-8 of amp, tolerance 5e-7 · amp.
    let err = 0;
    for (let t = 0; t < 2; t++) for (let i = 0; i < n; i++) err = Math.max(err, Math.abs(env[t * n + i] - want[i]));
    expect(err).toBeLessThan(5e-7 * amp);
  });

  it("refuses bad arguments with the parameter named", () => {
    expect(() => createAnalyticSignalPlan(0)).toThrow(/sampleCount/);
    expect(() => createAnalyticSignalPlan(100, 64)).toThrow(/fftSize/);
    expect(() => createAnalyticSignalPlan(100, 200)).toThrow(/power of two/);
    const plan = createAnalyticSignalPlan(8);
    expect(() => envelopeInto(plan, new Float32Array(10), 3, new Float64Array(8))).toThrow(/offset/);
    expect(() => envelopeInto(plan, new Float32Array(8), 0, new Float64Array(4))).toThrow(/out/);
  });
});

describe("least-squares misfit", () => {
  it("of a time-shifted Ricker pair matches the closed-form ∫(r(t) − r(t−τ))² dt = 2(R(0) − R(τ))", () => {
    // Sampled sums of a smooth, fast-decaying, effectively band-limited function equal the integral
    // to far below Float32 rounding (Ricker spectrum at Nyquist 2 kHz with 30 Hz peak: ~e^(−4400)),
    // so the comparison measures the kernel, not the quadrature.
    const dt = 0.00025;
    const n = 1600;
    const peakHz = 30;
    for (const tauS of [0.002, 0.005, 0.0125, 0.04]) {
      const syn = new Float32Array(n);
      const obs = new Float32Array(n);
      for (let i = 0; i < n; i++) {
        syn[i] = ricker(i * dt - 0.15, peakHz);
        obs[i] = ricker(i * dt - 0.15 - tauS, peakHz);
      }
      const want = rickerAutocorrelation(0, peakHz) - rickerAutocorrelation(tauS, peakHz); // ½ · 2(R(0) − R(τ))
      const got = leastSquaresMisfit(syn, obs) * dt;
      // Float32 samples: relative rounding ~6e-8 per sample; measured ≤ 1.2e-8 relative, tolerance 1e-6.
      expect(Math.abs(got - want) / want).toBeLessThan(1e-6);
      // With trace normalisation the value is 1 − R(τ)/R(0) (the energy R(0)·/dt cancels).
      const normalised = leastSquaresMisfit(syn, obs, 0, n, true);
      const wantNormalised = 1 - rickerAutocorrelation(tauS, peakHz) / rickerAutocorrelation(0, peakHz);
      // Measured ≤ 1.7e-9; tolerance 1e-7.
      expect(Math.abs(normalised - wantNormalised)).toBeLessThan(1e-7);
    }
  });

  it("is zero for identical traces and counts a window only", () => {
    const rnd = seededRandom(11);
    const a = rnd.fillGaussian(new Float32Array(300));
    expect(leastSquaresMisfit(a, a)).toBe(0);
    const b = a.slice();
    b[10] += 2; // outside the window [50, 300)
    b[100] += 3;
    // ½ · 3² = 4.5 from the one changed sample in the window (definition, Tarantola 1984).
    expect(leastSquaresMisfit(b, a, 50, 300)).toBeCloseTo(4.5, 5);
    expect(leastSquaresMisfit(b, a)).toBeCloseTo(4.5 + 2, 5);
    expect(() => leastSquaresMisfit(a, a, 200, 100)).toThrow(/end/);
    expect(() => leastSquaresMisfit(a, a.subarray(1))).toThrow(/length/);
  });
});

describe("normalised correlation (Choi & Alkhalifah 2012)", () => {
  const rnd = seededRandom(2024);

  it("ignores the amplitude of either trace, as the paper states", () => {
    const s = rnd.fillGaussian(new Float32Array(500));
    const o = rnd.fillGaussian(new Float32Array(500));
    for (let i = 0; i < 500; i++) o[i] += 0.8 * s[i];
    const c = normalisedCorrelation(s, o);
    const s2 = s.map((v) => 3.7 * v);
    const o2 = o.map((v) => 1e-3 * v);
    // Scaling Float32 samples rounds each one (relative 6e-8); tolerance 1e-6.
    expect(Math.abs(normalisedCorrelation(s2, o) - c)).toBeLessThan(1e-6);
    expect(Math.abs(normalisedCorrelation(s, o2) - c)).toBeLessThan(1e-6);
    expect(Math.abs(normalisedCorrelation(s2, o2) - c)).toBeLessThan(1e-6);
    expect(c).toBeGreaterThan(0.3); // the traces do share a component
  });

  it("is 0 misfit for identical traces and 2 for reversed polarity, within [0, 2] always (Cauchy–Schwarz)", () => {
    const s = rnd.fillGaussian(new Float32Array(400));
    const one = traceMisfits({ synthetic: s, observed: s, traceCount: 1, sampleCount: 400, measure: "normalised-correlation" });
    expect(Math.abs(one[0])).toBeLessThan(1e-12);
    const neg = s.map((v) => -v);
    const two = traceMisfits({ synthetic: s, observed: neg, traceCount: 1, sampleCount: 400, measure: "normalised-correlation" });
    expect(Math.abs(two[0] - 2)).toBeLessThan(1e-12);
    // Cauchy–Schwarz: |s·o| ≤ ‖s‖‖o‖, so 0 ≤ 1 − ĉ ≤ 2; 200 seeded pairs of mixed correlation.
    const traces = 200;
    const ns = 64;
    const syn = rnd.fillGaussian(new Float32Array(traces * ns));
    const obs = rnd.fillGaussian(new Float32Array(traces * ns));
    for (let t = 0; t < traces; t++) for (let i = 0; i < ns; i++) obs[t * ns + i] += ((t % 9) - 4) * syn[t * ns + i];
    const j = traceMisfits({ synthetic: syn, observed: obs, traceCount: traces, sampleCount: ns, measure: "normalised-correlation" });
    for (const v of j) {
      expect(v).toBeGreaterThanOrEqual(0);
      expect(v).toBeLessThanOrEqual(2);
    }
  });

  it("equals 1 − R(τ)/R(0) for a shifted Ricker pair (closed form above) and the normalised least squares", () => {
    const dt = 0.0005;
    const n = 800;
    const tauS = 0.006;
    const syn = new Float32Array(n);
    const obs = new Float32Array(n);
    for (let i = 0; i < n; i++) {
      syn[i] = 4 * ricker(i * dt - 0.2, 25);
      obs[i] = 0.01 * ricker(i * dt - 0.2 - tauS, 25);
    }
    const want = 1 - rickerAutocorrelation(tauS, 25) / rickerAutocorrelation(0, 25);
    const j = traceMisfits({ synthetic: syn, observed: obs, traceCount: 1, sampleCount: n, measure: "normalised-correlation" })[0];
    expect(Math.abs(j - want)).toBeLessThan(1e-6);
    // ½‖ŝ − ô‖² = 1 − ŝ·ô for unit vectors (algebra), so both measures agree.
    const ls = traceMisfits({ synthetic: syn, observed: obs, traceCount: 1, sampleCount: n, measure: "least-squares", normaliseTraces: true })[0];
    expect(Math.abs(ls - j)).toBeLessThan(1e-6);
  });

  it("counts a trace with no energy as uncorrelated", () => {
    const s = rnd.fillGaussian(new Float32Array(50));
    expect(normalisedCorrelation(s, new Float32Array(50))).toBe(0);
    expect(leastSquaresMisfit(s, new Float32Array(50), 0, 50, true)).toBeCloseTo(0.5, 12);
  });
});

describe("envelope misfit (Bozdağ et al. 2011)", () => {
  it("of two tones is ½ N (A − B)², blind to their phase", () => {
    // Envelopes of A·cos and B·sin are the constants A and B (analytic signal, Bracewell), so in
    // a window away from the trace ends the misfit is ½ · N · (A − B)²; the least-squares misfit of
    // the same pair is ½ · N · (A² + B²)/2 over whole periods (cos ⟂ sin), 6.5 times larger.
    const n = 1024;
    const dt = 0.001;
    const syn = new Float32Array(n);
    const obs = new Float32Array(n);
    for (let i = 0; i < n; i++) {
      syn[i] = 1.5 * Math.cos(2 * Math.PI * 40 * i * dt);
      obs[i] = 1.0 * Math.sin(2 * Math.PI * 40 * i * dt);
    }
    const first = 256;
    const end = 768;
    const env = traceMisfits({ synthetic: syn, observed: obs, traceCount: 1, sampleCount: n, measure: "envelope", firstSample: first, endSample: end })[0];
    const want = 0.5 * (end - first) * 0.5 ** 2;
    // Finite-trace Hilbert error in the middle half (see the sin test) partly cancels between the
    // two envelopes: measured 0.027 % of the value; tolerance 0.2 %.
    expect(Math.abs(env - want) / want).toBeLessThan(0.002);
    const ls = traceMisfits({ synthetic: syn, observed: obs, traceCount: 1, sampleCount: n, measure: "least-squares", normaliseTraces: false, firstSample: first, endSample: end })[0];
    const wantLs = 0.5 * (end - first) * (1.5 ** 2 + 1) / 2;
    // 20.48 periods in the window, so the orthogonality is not exact: measured 0.077 %, tolerance 0.3 %.
    expect(Math.abs(ls - wantLs) / wantLs).toBeLessThan(0.003);
  });

  it("is zero for identical traces and skips excluded traces with NaN", () => {
    const rnd = seededRandom(5);
    const a = rnd.fillGaussian(new Float32Array(3 * 100));
    const j = traceMisfits({ synthetic: a, observed: a, traceCount: 3, sampleCount: 100, measure: "envelope", include: Uint8Array.from([1, 0, 1]) });
    expect(j[0]).toBe(0);
    expect(Number.isNaN(j[1])).toBe(true);
    expect(j[2]).toBe(0);
  });

  it("refuses bad arguments with the parameter named", () => {
    const a = new Float32Array(20);
    expect(() => traceMisfits({ synthetic: a, observed: a, traceCount: 3, sampleCount: 7, measure: "envelope" })).toThrow(/traceCount/);
    expect(() => traceMisfits({ synthetic: a, observed: a.subarray(2), traceCount: 2, sampleCount: 10, measure: "envelope" })).toThrow(/observed/);
    expect(() => traceMisfits({ synthetic: a, observed: a, traceCount: 2, sampleCount: 10, measure: "l1" as never })).toThrow(/measure/);
    expect(() => traceMisfits({ synthetic: a, observed: a, traceCount: 2, sampleCount: 10, measure: "envelope", firstSample: 11 })).toThrow(/first/);
    expect(() => traceMisfits({ synthetic: a, observed: a, traceCount: 2, sampleCount: 10, measure: "envelope", include: new Uint8Array(3) })).toThrow(/include/);
  });
});
