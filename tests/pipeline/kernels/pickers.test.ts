import { describe, expect, it } from "vitest";
import { aicPicks, flagOffsetOutliers, qualityFromEnergyRatio, staLtaPicks } from "../../../pipeline/kernels/pickers";
import { seededRandom } from "../../helpers/random";

const DT = 0.0005; // 0.5 ms
const N = 1000;
const TRACES = 300;
const F = 40; // Hz: 50 samples per period

/**
 * Seeded traces: unit-variance Gaussian noise plus, from a known onset sample, a decaying 40 Hz
 * sine sin(2πfτ)·exp(−τf/4) scaled so its peak is `snr` times the noise standard deviation.
 */
function syntheticTraces(snr: number, seed: number) {
  const rnd = seededRandom(seed);
  const data = new Float32Array(TRACES * N);
  const onsets = new Float64Array(TRACES);
  const sig = new Float64Array(N);
  for (let t = 0; t < TRACES; t++) {
    const on = 300 + Math.floor(rnd.uniform() * 300);
    onsets[t] = on;
    sig.fill(0);
    let peak = 0;
    for (let i = on; i < N; i++) {
      const tau = (i - on) * DT;
      sig[i] = Math.sin(2 * Math.PI * F * tau) * Math.exp((-tau * F) / 4);
      peak = Math.max(peak, Math.abs(sig[i]));
    }
    for (let i = 0; i < N; i++) data[t * N + i] = rnd.gaussian() + (snr * sig[i]) / peak;
  }
  return { data, onsets };
}

/** Absolute pick errors (samples) of the traces that got a pick, sorted. */
function errors(index: Float64Array, onsets: Float64Array): number[] {
  const out: number[] = [];
  for (let i = 0; i < index.length; i++) if (index[i] === index[i]) out.push(Math.abs(index[i] - onsets[i]));
  return out.sort((a, b) => a - b);
}
const quantile = (sorted: number[], q: number) => sorted[Math.floor(q * (sorted.length - 1))];
const mean = (a: ArrayLike<number>) => Array.from(a).reduce((s, x) => s + x, 0) / a.length;

describe("first-arrival pickers on seeded synthetic traces with a known onset", () => {
  // The onset is the first sample of the arrival; the reference is the construction itself.
  // Tolerances are stated per SNR (peak signal / noise RMS) and were chosen as a quarter period
  // of the 40 Hz arrival (12.5 samples) at SNR 3 and a tenth of a period at SNR 10.
  const clean = syntheticTraces(10, 11);
  const noisy = syntheticTraces(3, 13);

  it("STA/LTA (Allen 1978) at SNR 10: every trace picked, 95 % within 5 samples, all within 10", () => {
    const p = staLtaPicks(clean.data, TRACES, N, { searchStart: 0, searchEnd: N, shortSamples: 25, longSamples: 250 }, 3.5);
    const e = errors(p.index, clean.onsets);
    expect(e.length).toBe(TRACES);
    expect(quantile(e, 0.95)).toBeLessThanOrEqual(5);
    expect(e[e.length - 1]).toBeLessThanOrEqual(10);
  });

  it("AIC (Maeda 1985) around the STA/LTA pick at SNR 10: 95 % within 4 samples, all within 6", () => {
    const w = { searchStart: 0, searchEnd: N, shortSamples: 25, longSamples: 250 };
    const first = staLtaPicks(clean.data, TRACES, N, w, 3.5);
    const p = aicPicks(clean.data, TRACES, N, w, { centres: first.index, halfWidth: 50 });
    const e = errors(p.index, clean.onsets);
    expect(e.length).toBe(TRACES);
    expect(quantile(e, 0.95)).toBeLessThanOrEqual(4);
    expect(e[e.length - 1]).toBeLessThanOrEqual(6);
  });

  it("AIC alone in a ±150-sample window that holds the onset at SNR 10: 95 % within 4 samples", () => {
    const rnd = seededRandom(99);
    const centres = clean.onsets.map((o) => o + Math.round((rnd.uniform() - 0.5) * 100));
    const p = aicPicks(clean.data, TRACES, N, { searchStart: 0, searchEnd: N, shortSamples: 25, longSamples: 250 }, { centres, halfWidth: 150 });
    const e = errors(p.index, clean.onsets);
    expect(e.length).toBe(TRACES);
    expect(quantile(e, 0.95)).toBeLessThanOrEqual(4);
  });

  it("at SNR 3: at least 75 % picked, 90 % of those within 10 samples, for both pickers", () => {
    const w = { searchStart: 0, searchEnd: N, shortSamples: 40, longSamples: 300 };
    const sta = staLtaPicks(noisy.data, TRACES, N, w, 2.5);
    const aic = aicPicks(noisy.data, TRACES, N, w, { centres: sta.index, halfWidth: 80 });
    for (const p of [sta, aic]) {
      const e = errors(p.index, noisy.onsets);
      expect(e.length).toBeGreaterThanOrEqual(0.75 * TRACES);
      expect(quantile(e, 0.9)).toBeLessThanOrEqual(10);
    }
  });

  it("quality rises with SNR and noise alone rarely triggers", () => {
    const w = { searchStart: 0, searchEnd: N, shortSamples: 25, longSamples: 250 };
    const qClean = mean(staLtaPicks(clean.data, TRACES, N, w, 3.5).quality);
    const qNoisy = mean(staLtaPicks(noisy.data, TRACES, N, w, 3.5).quality);
    expect(qClean).toBeGreaterThan(0.7);
    expect(qClean - qNoisy).toBeGreaterThan(0.3);
    const noise = seededRandom(5).fillGaussian(new Float32Array(TRACES * N));
    const p = staLtaPicks(noise, TRACES, N, w, 3.5);
    const picked = Array.from(p.index).filter((x) => x === x).length;
    expect(picked).toBeLessThan(0.05 * TRACES);
    expect(qualityFromEnergyRatio(100)).toBe(1); // 20 dB, by the definition in pickers.ts
    expect(qualityFromEnergyRatio(10)).toBeCloseTo(0.5, 12);
  });

  it("rejects bad windows with the parameter named", () => {
    const w = { searchStart: 0, searchEnd: N, shortSamples: 25, longSamples: 10 };
    expect(() => staLtaPicks(clean.data, TRACES, N, w, 3)).toThrow(/longSamples \(10\) must not be shorter than shortSamples/);
    expect(() => staLtaPicks(clean.data, TRACES, N, { ...w, longSamples: 100 }, 1)).toThrow(/triggerRatio must be above 1/);
    expect(() => aicPicks(clean.data, TRACES, N, { ...w, longSamples: 100, searchEnd: N + 1 })).toThrow(/search window/);
  });
});

describe("offset consistency of picks", () => {
  it("flags exactly the picks that break a smooth offset-time trend", () => {
    // Two-layer refraction trend (direct wave, then head wave) either side of the source,
    // with 0.2 ms seeded jitter and three planted outliers.
    const rnd = seededRandom(3);
    const offsets: number[] = [];
    const times: number[] = [];
    for (let i = 0; i < 48; i++) {
      const x = i - 23.5;
      offsets.push(x);
      const ax = Math.abs(x);
      times.push(Math.min(ax / 400, 0.012 + ax / 1600) + 0.0002 * rnd.gaussian());
    }
    times[5] += 0.01;
    times[30] -= 0.008;
    times[47] += 0.006; // the farthest trace on its side
    times[12] = NaN; // no pick
    const flags = flagOffsetOutliers(offsets, times, 3, 0.003);
    const flagged = Array.from(flags).flatMap((f, i) => (f ? [i] : []));
    expect(flagged).toEqual([5, 30, 47]);
  });
});

describe("per-trace search bounds", () => {
  // A noise burst before the true onset: an energy-ratio picker triggers on whatever comes first
  // (Allen 1978), so only a search window that starts after the burst finds the onset. Bounds
  // between velocity lines are common practice in first-break picking.
  function burstThenOnset() {
    const rnd = seededRandom(5);
    const data = new Float32Array(2 * N);
    for (let t = 0; t < 2; t++) {
      for (let i = 0; i < N; i++) {
        let v = 0.01 * rnd.gaussian();
        if (i >= 150 && i < 160) v += Math.sin(2 * Math.PI * F * (i - 150) * DT); // burst at 75 ms
        if (i >= 400) v += 0.8 * Math.sin(2 * Math.PI * F * (i - 400) * DT) * Math.exp((-(i - 400) * DT * F) / 4); // onset at 200 ms
        data[t * N + i] = v;
      }
    }
    return data;
  }
  const window = { searchStart: 0, searchEnd: N, shortSamples: 10, longSamples: 100 };

  it("without bounds the burst is picked; with a per-trace start after it, the onset is", () => {
    const data = burstThenOnset();
    const free = staLtaPicks(data, 2, N, window, 4);
    expect(Math.abs(free.index[0] - 150)).toBeLessThan(10);
    const bounded = staLtaPicks(data, 2, N, { ...window, perTrace: { start: Int32Array.of(300, 300), end: Int32Array.of(N, 600) } }, 4);
    expect(Math.abs(bounded.index[0] - 400)).toBeLessThan(10);
    expect(Math.abs(bounded.index[1] - 400)).toBeLessThan(10);
    const aic = aicPicks(data, 2, N, { ...window, perTrace: { start: Int32Array.of(300, 300), end: Int32Array.of(N, N) } });
    expect(Math.abs(aic.index[0] - 400)).toBeLessThan(10);
  });

  it("gives no pick where the bounds leave nothing to search, and checks their length", () => {
    const data = burstThenOnset();
    const none = staLtaPicks(data, 2, N, { ...window, perTrace: { start: Int32Array.of(300, 500), end: Int32Array.of(350, 500) } }, 4);
    expect(Number.isNaN(none.index[1])).toBe(true);
    expect(() => staLtaPicks(data, 2, N, { ...window, perTrace: { start: Int32Array.of(0), end: Int32Array.of(N) } }, 4)).toThrow(/perTrace bounds must hold 2 entries/);
  });
});

describe("energy-ratio picks of a causal hammer pulse on a seeded gather", () => {
  // A gather as a hammer makes it: each trace carries the force pulse sin²(πτ/T) for 0 ≤ τ ≤ T
  // (T = 14 ms), which starts at the arrival time x / v (v = 400 m/s, x = 1 … 48 m) and not
  // before: a causal onset that rises slowly (as τ²). The reference is the construction itself.
  // Noise: seeded Gaussian, the pulse's peak 10 times its standard deviation.
  const dt = 0.00025;
  const ns = 1200;
  const traces = 48;
  const contactS = 0.014;
  const rnd = seededRandom(41);
  const data = new Float32Array(traces * ns);
  const onsetS = new Float64Array(traces);
  for (let t = 0; t < traces; t++) {
    onsetS[t] = (t + 1) / 400;
    for (let i = 0; i < ns; i++) {
      const tau = i * dt - onsetS[t];
      const pulse = tau >= 0 && tau <= contactS ? Math.sin((Math.PI * tau) / contactS) ** 2 : 0;
      data[t * ns + i] = 10 * pulse + rnd.gaussian();
    }
  }
  // The step's default windows: 5 ms short, 50 ms long.
  const window = { searchStart: 0, searchEnd: ns, shortSamples: 20, longSamples: 200 };
  const errorsMs = (index: Float64Array) => {
    const e: number[] = [];
    for (let t = 0; t < traces; t++) if (index[t] === index[t]) e.push((index[t] * dt - onsetS[t]) * 1000);
    return e.sort((p, q) => p - q);
  };
  const at = (sorted: number[], q: number) => sorted[Math.floor(q * (sorted.length - 1))];

  it("picks at the onset: median error 1.7 ± 0.75 ms, 90 % of the picks within 3 ms", () => {
    // Expected: the onset walk stops at the first sample 3 dB above the noise (ONSET_NOISE_FACTOR 2),
    // where 10 · sin²(πτ/T) = √2, i.e. τ = T · asin(√0.1414) / π = 1.7 ms after the true onset.
    // Tolerance: ±3 samples (0.75 ms) for the noise on that crossing; 3 ms for nine traces in ten.
    const e = errorsMs(staLtaPicks(data, traces, ns, window, 4, "onset").index);
    expect(e.length).toBeGreaterThanOrEqual(traces - 2);
    expect(Math.abs(at(e, 0.5) - 1.7)).toBeLessThanOrEqual(0.75);
    expect(at(e.map(Math.abs).sort((p, q) => p - q), 0.9)).toBeLessThanOrEqual(3);
  });

  it("picks at the ratio peak lie later than the onset picks (by at least 1 ms in the median)", () => {
    // The ratio peaks where the leading short window holds most of the pulse: after its slow rise.
    const peak = errorsMs(staLtaPicks(data, traces, ns, window, 4, "ratio-peak").index);
    const onset = errorsMs(staLtaPicks(data, traces, ns, window, 4, "onset").index);
    expect(at(peak, 0.5) - at(onset, 0.5)).toBeGreaterThanOrEqual(1);
  });

  it("rejects an unknown pick position with the parameter named", () => {
    expect(() => staLtaPicks(data, traces, ns, window, 4, "middle" as "onset")).toThrow(/pickAt/);
  });
});
