import { describe, expect, it } from "vitest";
import { estimateWavelet } from "../../../pipeline/kernels/wavelet-estimation";
import { seededRandom } from "../../helpers/random";

const DT = 0.0005; // s
const SAMPLES = 400;
const TRACES = 8;
const L = 80; // wavelet samples (40 ms)

/** Causal damped sinusoid sin(2πft)·e^(−t/τ), t = k·dt ≥ 0 (not a Ricker; a common test pulse). */
function dampedSinusoid(freqHz: number, tauS: number): Float64Array {
  const w = new Float64Array(L);
  for (let k = 0; k < L; k++) w[k] = Math.sin(2 * Math.PI * freqHz * k * DT) * Math.exp((-k * DT) / tauS);
  return w;
}

/** Direct time-domain convolution y[k] = Σ_j g[j] w[k − j], truncated to n samples (definition). */
function convolve(g: Float64Array, w: Float64Array, n: number): Float64Array {
  const y = new Float64Array(n);
  for (let k = 0; k < n; k++) {
    let s = 0;
    for (let j = Math.max(0, k - w.length + 1); j <= k; j++) s += g[j] * w[k - j];
    y[k] = s;
  }
  return y;
}

/** Seeded impulse responses: 3 to 6 spikes per trace between samples 20 and 250 (all arrivals end before sample 330). */
function impulseResponses(seed: number): Float64Array[] {
  const random = seededRandom(seed);
  const out: Float64Array[] = [];
  for (let t = 0; t < TRACES; t++) {
    const g = new Float64Array(SAMPLES);
    const spikes = 3 + Math.floor(random.uniform() * 4);
    for (let i = 0; i < spikes; i++) g[20 + Math.floor(random.uniform() * 230)] += random.gaussian();
    out.push(g);
  }
  return out;
}

function block(traces: Float64Array[]): Float64Array {
  const b = new Float64Array(traces.length * SAMPLES);
  traces.forEach((tr, t) => b.set(tr, t * SAMPLES));
  return b;
}

function relativeL2(a: Float64Array, b: Float64Array): number {
  let num = 0;
  let den = 0;
  for (let i = 0; i < a.length; i++) {
    num += (a[i] - b[i]) ** 2;
    den += b[i] ** 2;
  }
  return Math.sqrt(num / den);
}

describe("source-wavelet estimation (Pratt 1999, Geophysics 64)", () => {
  const trueWavelet = dampedSinusoid(60, 0.006);
  const g = impulseResponses(3);
  const observed = block(g.map((gi) => convolve(gi, trueWavelet, SAMPLES)));
  const impulse = new Float64Array(L);
  impulse[0] = 1;

  it("recovers a known damped-sinusoid wavelet from impulse-response synthetics within 1e-3 relative L2", () => {
    // Noise-free and without truncation (every convolution ends inside the trace), so D = G·W and
    // S = G exactly; the only error is the water level, W·P/(P + ε), tiny for ε = 1e-8 of the peak.
    const est = estimateWavelet({ observed, synthetic: block(g), traceCount: TRACES, sampleCount: SAMPLES, currentWavelet: impulse, sampleIntervalS: DT, waterLevel: 1e-8 });
    expect(relativeL2(est.wavelet, trueWavelet)).toBeLessThan(1e-3);
    expect(est.fit).toBeLessThan(1e-3);
  });

  it("recovers it from synthetics made with a different current wavelet (new wavelet = correction ∗ w₀)", () => {
    const w0 = dampedSinusoid(35, 0.003);
    const synthetic = block(g.map((gi) => convolve(gi, w0, SAMPLES)));
    const est = estimateWavelet({ observed, synthetic, traceCount: TRACES, sampleCount: SAMPLES, currentWavelet: w0, sampleIntervalS: DT, waterLevel: 1e-8 });
    expect(relativeL2(est.wavelet, trueWavelet)).toBeLessThan(1e-3);
    // fitBefore is ‖d − s‖/‖d‖ of the whole traces: Parseval makes the spectral sum equal the time-domain one (rounding only).
    let num = 0;
    let den = 0;
    for (let i = 0; i < observed.length; i++) {
      num += (observed[i] - synthetic[i]) ** 2;
      den += observed[i] ** 2;
    }
    expect(est.fitBefore).toBeCloseTo(Math.sqrt(num / den), 10);
  });

  it("ignores zero-weight traces and samples outside the window", () => {
    const spoiled = observed.slice();
    const random = seededRandom(8);
    // A noise burst after sample 360 on trace 2 (outside the window [0, 350), whose 2 ms taper lies in quiet samples).
    for (let k = 360; k < SAMPLES; k++) spoiled[2 * SAMPLES + k] += 5 * random.gaussian();
    const common = { synthetic: block(g), traceCount: TRACES, sampleCount: SAMPLES, currentWavelet: impulse, sampleIntervalS: DT, waterLevel: 1e-8 };
    const windowed = estimateWavelet({ ...common, observed: spoiled, endSample: 350, taperMs: 2 });
    expect(relativeL2(windowed.wavelet, trueWavelet)).toBeLessThan(1e-3);
    const unwindowed = estimateWavelet({ ...common, observed: spoiled });
    expect(relativeL2(unwindowed.wavelet, trueWavelet)).toBeGreaterThan(1e-2); // the window is what keeps the burst out

    // Trace 5 replaced by noise but weighted 0: the estimate is the same as without that trace.
    const noisy = observed.slice();
    for (let k = 0; k < SAMPLES; k++) noisy[5 * SAMPLES + k] = random.gaussian();
    const weights = new Float64Array(TRACES).fill(1);
    weights[5] = 0;
    const weighted = estimateWavelet({ ...common, observed: noisy, weights });
    expect(relativeL2(weighted.wavelet, trueWavelet)).toBeLessThan(1e-3);
  });

  it("refuses synthetics without energy and a bad water level", () => {
    const base = { observed, synthetic: new Float64Array(observed.length), traceCount: TRACES, sampleCount: SAMPLES, currentWavelet: impulse, sampleIntervalS: DT };
    expect(() => estimateWavelet(base)).toThrow(/no energy/);
    expect(() => estimateWavelet({ ...base, synthetic: block(g), waterLevel: -1 })).toThrow(/waterLevel/);
  });
});
