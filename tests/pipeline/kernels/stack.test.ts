/**
 * Vertical stack kernels against statistics textbook results: the variance of a mean of
 * independent variables, the exact distribution of the sample median (order statistics), the
 * inverse-variance weighted mean, and Grubbs's estimator of individual instrument precision.
 */
import { describe, expect, it } from "vitest";
import {
  blowNoiseVariances,
  linearStackNoiseVariance,
  meanStack,
  meanStackWeights,
  medianStack,
  weightedStack,
  windowMeanSquare,
  type StackInput,
} from "../../../pipeline/kernels/stack";
import { seededRandom } from "../../helpers/random";

const TRACES = 48;
const SAMPLES = 500;
/** Samples per record; the relative standard error of an RMS estimated from M Gaussian samples is about 1/sqrt(2M) = 0.46 % here. */
const M = TRACES * SAMPLES;

/** A smooth deterministic "signal" (decaying sine per trace), flat [trace][sample]. */
function cleanSignal(): Float32Array {
  const s = new Float32Array(M);
  for (let t = 0; t < TRACES; t++) {
    for (let i = 0; i < SAMPLES; i++) s[t * SAMPLES + i] = Math.exp(-i / 200) * Math.sin((2 * Math.PI * (i - 2 * t)) / 40);
  }
  return s;
}

/** N blows: the signal plus independent Gaussian noise of standard deviation sigmas[b]. */
function blows(signal: Float32Array, sigmas: number[], seed: number): Float32Array[] {
  const rng = seededRandom(seed);
  return sigmas.map((sigma) => {
    const r = new Float32Array(signal.length);
    for (let i = 0; i < r.length; i++) r[i] = signal[i] + sigma * rng.gaussian();
    return r;
  });
}

function rmsDifference(a: Float32Array, b: Float32Array): number {
  let s = 0;
  for (let i = 0; i < a.length; i++) s += (a[i] - b[i]) ** 2;
  return Math.sqrt(s / a.length);
}

function input(records: Float32Array[], live?: Uint8Array): StackInput {
  return { records, traceCount: TRACES, sampleCount: SAMPLES, live };
}

/**
 * Exact variance of the median of n = 2m + 1 independent standard normal variables from the
 * density of the (m+1)-th order statistic, f(x) = n! / (m!)^2 F(x)^m (1 - F(x))^m phi(x)
 * (David & Nagaraja, Order Statistics, eq. 2.1.6). Integrated numerically: F by cumulative
 * trapezoids of phi on a 1e-3 grid over [-9, 9] (error ~1e-7), then the second moment by
 * trapezoids on the same grid.
 */
function exactMedianVariance(n: number): number {
  if (n % 2 !== 1) throw new Error("odd n only");
  const m = (n - 1) / 2;
  let logCoef = 0;
  for (let k = m + 1; k <= n; k++) logCoef += Math.log(k);
  for (let k = 2; k <= m; k++) logCoef -= Math.log(k);
  const h = 1e-3;
  const lo = -9;
  const steps = 18_000;
  const phi = (x: number) => Math.exp(-0.5 * x * x) / Math.sqrt(2 * Math.PI);
  let F = 0;
  let prevPhi = phi(lo);
  let prevIntegrand = 0;
  let second = 0;
  for (let i = 1; i <= steps; i++) {
    const x = lo + i * h;
    const p = phi(x);
    F += 0.5 * h * (prevPhi + p);
    prevPhi = p;
    const Fc = Math.min(Math.max(F, 1e-300), 1 - 1e-16);
    const density = Math.exp(logCoef + m * Math.log(Fc) + m * Math.log(1 - Fc)) * p;
    const integrand = x * x * density;
    second += 0.5 * h * (prevIntegrand + integrand);
    prevIntegrand = integrand;
  }
  return second;
}

describe("meanStack", () => {
  const signal = cleanSignal();
  const sigma = 0.3;
  for (const N of [1, 4, 16]) {
    it(`lowers independent Gaussian noise by sqrt(N) for N = ${N}`, () => {
      const stack = meanStack(input(blows(signal, new Array(N).fill(sigma), 1000 + N)));
      // Variance of a mean of N independent variables is sigma^2 / N (any statistics textbook).
      // 3 % tolerance: about 6 standard errors of an RMS from 24 000 samples (1/sqrt(2M) = 0.46 %).
      expect(Math.abs(rmsDifference(stack, signal) / (sigma / Math.sqrt(N)) - 1)).toBeLessThan(0.03);
    });
  }

  it("leaves out masked traces and zeros a trace with no live blow", () => {
    const a = new Float32Array(M).fill(1);
    const b = new Float32Array(M).fill(3);
    const dead = new Float32Array(M); // blow 3 is dead on trace 0
    const live = new Uint8Array(3 * TRACES).fill(1);
    live[2 * TRACES + 0] = 0;
    // Trace 5 dead in every blow.
    live[0 * TRACES + 5] = 0;
    live[1 * TRACES + 5] = 0;
    live[2 * TRACES + 5] = 0;
    const out = meanStack(input([a, b, dead], live));
    expect(out[0]).toBe(2); // (1 + 3) / 2, the dead blow not counted
    expect(out[1 * SAMPLES]).toBeCloseTo(4 / 3, 6); // (1 + 3 + 0) / 3
    expect(out.subarray(5 * SAMPLES, 6 * SAMPLES).every((v) => v === 0)).toBe(true);
    // Inputs untouched.
    expect(a[0]).toBe(1);
  });

  it("writes into a given buffer and rejects bad arguments with the parameter named", () => {
    const out = new Float32Array(M);
    const records = [new Float32Array(M).fill(2)];
    expect(meanStack(input(records), out)).toBe(out);
    expect(out[M - 1]).toBe(2);
    expect(() => meanStack({ records: [], traceCount: 1, sampleCount: 1 })).toThrow(/records must hold at least one record, got 0/);
    expect(() => meanStack({ records, traceCount: 0, sampleCount: SAMPLES })).toThrow(RangeError);
    expect(() => meanStack({ records, traceCount: TRACES, sampleCount: 7 })).toThrow(/records\[0\] has 24000 samples, expected traceCount \* sampleCount = 336/);
    expect(() => meanStack(input(records, new Uint8Array(3)))).toThrow(/live has length 3/);
    expect(() => meanStack(input(records), new Float32Array(5))).toThrow(/out has length 5/);
  });
});

describe("medianStack", () => {
  const signal = cleanSignal();

  it("takes the middle value, or the mean of the two middle values", () => {
    const vals = [5, -1, 2, 9];
    const recs = vals.map((v) => new Float32Array(1).fill(v));
    expect(medianStack({ records: recs, traceCount: 1, sampleCount: 1 })[0]).toBe(3.5);
    expect(medianStack({ records: recs.slice(0, 3), traceCount: 1, sampleCount: 1 })[0]).toBe(2);
  });

  for (const N of [5, 15, 51]) {
    it(`matches the exact variance of the median of ${N} Gaussian blows (order statistics)`, () => {
      const sigma = 0.5;
      const stack = medianStack(input(blows(signal, new Array(N).fill(sigma), 2000 + N)));
      const measured = rmsDifference(stack, signal) ** 2;
      const exact = sigma * sigma * exactMedianVariance(N);
      // 5 % on a variance: about 5 standard errors (sqrt(2/M) = 0.9 %) for 24 000 samples.
      expect(Math.abs(measured / exact - 1)).toBeLessThan(0.05);
    });
  }

  it("approaches the asymptotic efficiency 2/pi of the median (Kendall & Stuart)", () => {
    // Noise reduction of the median stack is sqrt(2N/pi) for large N: var = pi sigma^2 / (2N).
    // Exact finite-N variance from order statistics (same integration as above); the ratio to
    // the asymptotic value falls towards 1 as N grows (checked on the closed form, then the
    // kernel is checked against the closed form in the tests above). For small N the median is
    // relatively better than 2/pi (efficiency 0.743 for N = 3, from memory), so the ratio
    // rises towards 1 from below.
    const ratio = (n: number) => exactMedianVariance(n) / (Math.PI / (2 * n));
    const seq = [3, 5, 15, 51, 201].map(ratio);
    for (let i = 1; i < seq.length; i++) expect(seq[i]).toBeGreaterThan(seq[i - 1]);
    expect(seq[seq.length - 1]).toBeLessThan(1);
    expect(1 - seq[seq.length - 1]).toBeLessThan(0.01);
    // The median of 3 standard normals has variance 0.4487 (from memory; Kendall & Stuart tables).
    expect(exactMedianVariance(3)).toBeCloseTo(0.4487, 3);
  });
});

describe("weightedStack", () => {
  const signal = cleanSignal();
  const sigma = 0.2;

  it("down-weights a blow with 10 times the noise and lands near the best linear stack of the good blows", () => {
    const recs = blows(signal, [sigma, sigma, 10 * sigma, sigma], 31);
    const mean = meanStack(input(recs));
    const { stack, weights } = weightedStack(input(recs));
    const meanError = rmsDifference(mean, signal);
    const weightedError = rmsDifference(stack, signal);
    // Variance of the mean stack: (3 sigma^2 + 100 sigma^2) / 16 -> RMS 2.54 sigma (variance of a sum of independent variables).
    expect(meanError / sigma).toBeCloseTo(Math.sqrt(103) / 4, 1);
    // Inverse-variance weighting reaches about the minimum-variance combination sigma / sqrt(3)
    // (Bevington & Robinson, weighted mean); 10 % for weight estimation scatter and sampling.
    expect(weightedError / (sigma / Math.sqrt(3))).toBeLessThan(1.1);
    expect(weightedError).toBeLessThan(meanError / 4);
    // Weights per trace sum to 1; the noisy blow gets about 1/100 of a good blow's weight.
    for (let t = 0; t < TRACES; t++) {
      let sum = 0;
      for (let b = 0; b < 4; b++) sum += weights[b * TRACES + t];
      expect(sum).toBeCloseTo(1, 12);
      expect(weights[2 * TRACES + t]).toBeLessThan(0.02 * weights[0 * TRACES + t]);
    }
  });

  it("resists a strong spike burst in one blow much better than the mean stack", () => {
    const recs = blows(signal, [sigma, sigma, sigma, sigma, sigma], 77);
    // Blow 2: a burst of +-50 spikes on 30 samples of every trace (a stone under the plate, a knock on the cable).
    const rng = seededRandom(5);
    for (let t = 0; t < TRACES; t++) {
      const start = t * SAMPLES + 100 + Math.floor(rng.uniform() * 300);
      for (let i = 0; i < 30; i++) recs[2][start + i] += (rng.uniform() < 0.5 ? -50 : 50);
    }
    const meanError = rmsDifference(meanStack(input(recs)), signal);
    const weightedError = rmsDifference(weightedStack(input(recs)).stack, signal);
    // Best case, the four clean blows alone: sigma / 2 (variance of a mean); 10 % allowance.
    expect(weightedError / (sigma / 2)).toBeLessThan(1.1);
    expect(weightedError).toBeLessThan(meanError / 5);
  });

  it("behaves like the mean stack when every blow has the same noise", () => {
    const N = 6;
    const recs = blows(signal, new Array(N).fill(sigma), 404);
    const weightedError = rmsDifference(weightedStack(input(recs)).stack, signal);
    // sqrt(N) reduction (variance of a mean); 5 %: sampling (0.5 %) plus the scatter of the estimated weights.
    expect(Math.abs(weightedError / (sigma / Math.sqrt(N)) - 1)).toBeLessThan(0.05);
  });

  it("passes one blow through, keeps exactly agreeing blows finite, and honours the mask", () => {
    const one = blows(signal, [sigma], 1);
    const r1 = weightedStack(input(one));
    expect(rmsDifference(r1.stack, one[0])).toBe(0);
    expect(r1.weights.every((w) => w === 1)).toBe(true);

    const same = [signal, signal, signal];
    const r2 = weightedStack(input(same));
    expect(rmsDifference(r2.stack, signal)).toBeLessThan(1e-7);
    expect(r2.weights.every((w) => Math.abs(w - 1 / 3) < 1e-12)).toBe(true);

    const live = new Uint8Array(3 * TRACES).fill(1);
    live[1 * TRACES + 4] = 0;
    const r3 = weightedStack(input(blows(signal, [sigma, sigma, sigma], 2), live));
    expect(r3.weights[1 * TRACES + 4]).toBe(0);
    expect(r3.weights[0 * TRACES + 4] + r3.weights[2 * TRACES + 4]).toBeCloseTo(1, 12);
    expect(() => weightedStack(input(same), { varianceFloorRatio: 0 })).toThrow(/varianceFloorRatio must be in \(0, 1\), got 0/);
  });
});

describe("noise estimates", () => {
  const signal = cleanSignal();

  it("recovers each blow's noise variance from the spread between blows (Grubbs 1948)", () => {
    const sigmas = [0.3, 0.4, 0.6, 1.2];
    const v = blowNoiseVariances(input(blows(signal, sigmas, 99)));
    // Tolerance 10 % of each variance: the smallest one is a difference of larger sums and has
    // the largest relative sampling error (about 2 % here).
    sigmas.forEach((s, i) => expect(Math.abs(v[i] / (s * s) - 1)).toBeLessThan(0.1));
    expect(blowNoiseVariances(input(blows(signal, [1], 1)))[0]).toBeNaN();
  });

  it("gives sigma^2 / N for a mean stack of equal-noise blows (variance of a mean)", () => {
    const N = 4;
    const inp = input(blows(signal, new Array(N).fill(0.5), 3));
    const w = meanStackWeights(inp);
    expect(linearStackNoiseVariance(w, new Float64Array(N).fill(0.25), TRACES)).toBeCloseTo(0.25 / N, 12);
  });

  it("measures the mean square of a window over the chosen traces", () => {
    const data = new Float32Array(2 * 4);
    data.set([1, 2, 3, 4, 10, 10, 10, 10]);
    expect(windowMeanSquare(data, 2, 4, 0, 2)).toBeCloseTo((1 + 4 + 100 + 100) / 4, 12);
    expect(windowMeanSquare(data, 2, 4, 1, 3, new Uint8Array([1, 0]))).toBeCloseTo((4 + 9) / 2, 12);
    expect(windowMeanSquare(data, 2, 4, 2, 2)).toBeNaN();
    expect(() => windowMeanSquare(data, 2, 4, 3, 1)).toThrow(/endSample must be a whole number in \[3, 4\], got 1/);
  });
});
