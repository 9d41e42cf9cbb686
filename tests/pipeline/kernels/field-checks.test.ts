/**
 * The field-check kernels on synthetic traces with known answers: closed forms of RMS and of the
 * Hann-windowed DFT (Harris 1978), a reversed trace, clipped samples counted independently, a
 * source moved by a known distance and a record delayed by a known time.
 */
import { describe, expect, it } from "vitest";
import {
  clippedSamples,
  fitSourcePosition,
  lineLevels,
  median,
  neighbourLevelRatio,
  polarityScores,
  recordLag,
  scaledMad,
  windowRms,
} from "../../../pipeline/kernels/field-checks";
import { gaussianSource, mulberry32 } from "../../helpers/random";

const DT = 0.00025;

/** Ricker wavelet of peak frequency f at time t (Ricker 1953). */
function ricker(t: number, f: number): number {
  const a = (Math.PI * f * t) ** 2;
  return (1 - 2 * a) * Math.exp(-a);
}

/**
 * A shot gather of ground without lateral changes: a Ricker pulse arriving at |x − s| / c with
 * 1/√r spreading, plus seeded white noise. Layout [trace][sample], receivers at 0, 1, … m.
 */
function gather(opts: { sourceX: number; channels: number; samples: number; velocity: number; noise: number; seed: number; delayS?: number }) {
  const gauss = gaussianSource(mulberry32(opts.seed));
  const data = new Float32Array(opts.channels * opts.samples);
  const receiverX = Array.from({ length: opts.channels }, (_, i) => i);
  for (let t = 0; t < opts.channels; t++) {
    const r = Math.abs(receiverX[t] - opts.sourceX);
    const arrival = 0.02 + (opts.delayS ?? 0) + r / opts.velocity;
    for (let k = 0; k < opts.samples; k++) data[t * opts.samples + k] = ricker(k * DT - arrival, 30) / Math.sqrt(Math.max(r, 0.5)) + opts.noise * gauss();
  }
  return { data, receiverX };
}

describe("median and scaled MAD", () => {
  it("estimate the centre and standard deviation of normal samples (Rousseeuw & Croux 1993: MAD × 1.4826)", () => {
    const gauss = gaussianSource(mulberry32(7));
    const x = Array.from({ length: 20000 }, () => 3 + 2 * gauss());
    // Standard errors at n = 20000: median about 0.018, MAD-based σ about 0.017 (from memory); 3 % is well outside both.
    expect(median(x)).toBeCloseTo(3, 1);
    expect(Math.abs(scaledMad(x) / 2 - 1)).toBeLessThan(0.03);
    expect(median([4, 1, NaN, 3])).toBe(3);
  });
});

describe("windowRms and neighbourLevelRatio", () => {
  it("give A/√2 for a sine over whole periods and flag a dead and a weak trace against their neighbours", () => {
    const ns = 2000;
    const amps = [1, 1, 1, 0, 1, 1, 0.5, 1, 1];
    const data = new Float32Array(amps.length * ns);
    // 50 Hz at 0.25 ms: 80 samples per period, 2000 samples = 25 periods.
    amps.forEach((a, t) => {
      for (let k = 0; k < ns; k++) data[t * ns + k] = a * Math.sin(2 * Math.PI * 50 * k * DT);
    });
    const rms = windowRms(data, amps.length, ns, new Int32Array(amps.length), new Int32Array(amps.length).fill(ns));
    // RMS of A sin over whole periods is A/√2 (closed form); float32 samples: 1e-6.
    amps.forEach((a, t) => expect(rms[t]).toBeCloseTo(a / Math.SQRT2, 6));
    const ratio = neighbourLevelRatio(rms, amps.map((_, i) => i), 2);
    expect(ratio[3]).toBe(0);
    expect(ratio[6]).toBeCloseTo(0.5, 6);
    expect(ratio[0]).toBeCloseTo(1, 6);
    expect(() => windowRms(data, amps.length, ns, [0], [1])).toThrow(/start and end must hold 9/);
  });
});

describe("polarityScores", () => {
  it("scores a reversed trace near −1 and the others positive", () => {
    const nt = 24;
    const ns = 1200;
    const g = gather({ sourceX: -1, channels: nt, samples: ns, velocity: 180, noise: 0.01, seed: 11 });
    for (let k = 0; k < ns; k++) g.data[9 * ns + k] *= -1;
    const scores = polarityScores(g.data, nt, ns, {
      order: g.receiverX.map((_, i) => i),
      receiverX: g.receiverX,
      skip: new Uint8Array(nt),
      neighbours: 2,
      windowStart: 0,
      windowEnd: ns,
      lagSamplesPerM: 1 / 100 / DT,
      lagSlackSamples: 8,
    });
    // Neighbours differ only by 1/√r and the move-out, which the lag search takes out: |score| > 0.8.
    expect(scores[9]).toBeLessThan(-0.8);
    for (let t = 0; t < nt; t++) if (t !== 9) expect(scores[t]).toBeGreaterThan(0.5);
  });
});

describe("lineLevels", () => {
  it("gives a bin-centred sine's amplitude exactly (Hann coherent gain N/2, Harris 1978)", () => {
    const ns = 2000;
    const x = new Float32Array(ns);
    for (let k = 0; k < ns; k++) x[k] = 0.3 * Math.sin(2 * Math.PI * 50 * k * DT + 0.7);
    const [line] = lineLevels(x, 0, ns, DT, [50]);
    // Float32 samples: relative 1e-5.
    expect(Math.abs(line.amplitude / 0.3 - 1)).toBeLessThan(1e-5);
  });

  it("gives a 50 Hz line in white noise at 10·log10(A²N/(6σ²)) dB (coherent gain N/2, noise gain 3N/8; Harris 1978)", () => {
    const ns = 2000;
    const sigma = 0.01;
    const gauss = gaussianSource(mulberry32(5));
    const x = new Float32Array(ns);
    // Expected level for A = 0.01: 10·log10(1e-4·2000 / (6·1e-4)) = 25.2 dB.
    const a = 0.01;
    const expected = 10 * Math.log10((a * a * ns) / (6 * sigma * sigma));
    const ratios: number[] = [];
    for (let trial = 0; trial < 40; trial++) {
      for (let k = 0; k < ns; k++) x[k] = a * Math.sin(2 * Math.PI * 50 * k * DT + trial) + sigma * gauss();
      ratios.push(10 ** (lineLevels(x, 0, ns, DT, [50])[0].levelDb / 10));
    }
    // The line bin carries noise too (adds about 1/expected-ratio ≈ 0.3 % of the line power) and the
    // mean of 16 side bins scatters by about 25 % per trial; over 40 trials the mean ratio is good to about 0.5 dB.
    const meanDb = 10 * Math.log10(ratios.reduce((s, v) => s + v, 0) / ratios.length);
    expect(Math.abs(meanDb - expected)).toBeLessThan(1);
  });

  it("refuses a frequency above Nyquist, naming it", () => {
    expect(() => lineLevels(new Float32Array(100), 0, 100, DT, [2500])).toThrow(/frequenciesHz\[0\] must lie in \(0, 2000\)/);
  });
});

describe("clippedSamples", () => {
  it("counts the samples of runs at the extreme value, as counted directly", () => {
    const ns = 2000;
    const x = new Float32Array(ns);
    for (let k = 0; k < ns; k++) x[k] = Math.max(-0.8, Math.min(0.8, Math.sin(2 * Math.PI * 20 * k * DT)));
    let expected = 0;
    for (let k = 0; k < ns; k++) if (Math.abs(Math.sin(2 * Math.PI * 20 * k * DT)) >= 0.8) expected++;
    const c = clippedSamples(x, 0, ns, 3);
    expect(c.clippedSamples).toBe(expected);
    expect(c.peak).toBeCloseTo(0.8, 6);
    const clean = new Float32Array(ns);
    for (let k = 0; k < ns; k++) clean[k] = Math.sin(2 * Math.PI * 20 * k * DT + 0.1);
    expect(clippedSamples(clean, 0, ns, 3).clippedSamples).toBe(0);
  });
});

describe("fitSourcePosition", () => {
  it("finds a source shot 2.4 m from its logged position within 0.5 m", () => {
    const nt = 48;
    const ns = 1200;
    const g = gather({ sourceX: 25.4, channels: nt, samples: ns, velocity: 160, noise: 0.005, seed: 3 });
    const fit = fitSourcePosition(g.data, nt, ns, g.receiverX, new Uint8Array(nt), 23, {
      minOffsetM: 0.5,
      maxOffsetM: 12,
      minPairs: 4,
      maxShiftM: 5,
      windowStart: 0,
      windowEnd: ns,
    });
    expect(Math.abs(fit.positionErrorM - 2.4)).toBeLessThan(0.5);
    expect(fit.symmetry).toBeGreaterThan(fit.symmetryAtLog);
  });

  it("leaves a source at the end of the spread unjudged", () => {
    const nt = 24;
    const ns = 800;
    const g = gather({ sourceX: -1, channels: nt, samples: ns, velocity: 160, noise: 0.005, seed: 4 });
    const fit = fitSourcePosition(g.data, nt, ns, g.receiverX, new Uint8Array(nt), -1, {
      minOffsetM: 0.5,
      maxOffsetM: 12,
      minPairs: 4,
      maxShiftM: 1.5,
      windowStart: 0,
      windowEnd: ns,
    });
    expect(fit.positionErrorM).toBeNaN();
  });
});

describe("recordLag", () => {
  it("gives the delay of a record fired 3.3 ms late within 0.1 ms", () => {
    const nt = 24;
    const ns = 1200;
    const a = gather({ sourceX: 11, channels: nt, samples: ns, velocity: 160, noise: 0.005, seed: 8 });
    const b = gather({ sourceX: 11, channels: nt, samples: ns, velocity: 160, noise: 0.005, seed: 9, delayS: 0.0033 });
    const r = recordLag(a.data, b.data, nt, ns, new Uint8Array(nt), DT, 0, ns, 80);
    // Parabolic interpolation of a 30 Hz peak sampled at 0.25 ms: bias well under 0.05 ms.
    expect(Math.abs(r.lagS - 0.0033)).toBeLessThan(0.0001);
    expect(r.correlation).toBeGreaterThan(0.9);
  });
});
