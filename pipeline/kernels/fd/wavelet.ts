/**
 * Source-time functions for the solver: a Ricker wavelet with a peak frequency, or samples from
 * an artifact (e.g. an estimated hammer wavelet), each with a time shift.
 */
import { resampleBandLimited } from "../resample";

/** A source-time function description. Times in s, frequencies in Hz. */
export type SourceWavelet =
  | {
      kind: "ricker";
      /** Peak frequency, Hz. */
      peakHz: number;
      /** Time of the wavelet's centre after the source instant, s. Default 1.2/peakHz (starts at ~0). */
      shiftS?: number;
    }
  | {
      kind: "samples";
      samples: Float32Array;
      /** Sample interval, s. */
      intervalS: number;
      /** Time of the first sample, s. */
      startTimeS: number;
      /** Added delay, s. Default 0. */
      shiftS?: number;
    };

/** Ricker wavelet (1 − 2π²f²τ²)·exp(−π²f²τ²) at τ = t − shift (Ricker 1953). */
export function ricker(tS: number, peakHz: number, shiftS: number): number {
  const a = Math.PI * peakHz * (tS - shiftS);
  const a2 = a * a;
  return (1 - 2 * a2) * Math.exp(-a2);
}

/** Default Ricker delay: 1.2 periods of the peak frequency, where the wavelet is below 1e-4 of its peak. */
export function defaultRickerShiftS(peakHz: number): number {
  return 1.2 / peakHz;
}

/** Samples the wavelet at times `t0 + k·dt`, k = 0..n−1. */
export function sampleWavelet(w: SourceWavelet, t0: number, dt: number, n: number): Float64Array {
  const out = new Float64Array(n);
  if (w.kind === "ricker") {
    if (!(w.peakHz > 0)) throw new RangeError(`peakHz must be > 0, got ${w.peakHz}`);
    const shift = w.shiftS ?? defaultRickerShiftS(w.peakHz);
    for (let k = 0; k < n; k++) out[k] = ricker(t0 + k * dt, w.peakHz, shift);
    return out;
  }
  if (!(w.intervalS > 0)) throw new RangeError(`wavelet intervalS must be > 0, got ${w.intervalS}`);
  resampleBandLimited(w.samples, w.startTimeS + (w.shiftS ?? 0), w.intervalS, t0, dt, n, out);
  return out;
}

/**
 * Amplitude spectrum facts of a wavelet: the frequency of the spectral peak and the highest
 * frequency whose amplitude reaches `floor` (default 0.05) of the peak. Computed by a direct
 * Fourier sum on 512 frequencies (no FFT length constraints).
 */
export function waveletBand(w: SourceWavelet, floor = 0.05): { peakHz: number; maxHz: number } {
  let dt: number;
  let samples: ArrayLike<number>;
  let fNyq: number;
  if (w.kind === "ricker") {
    // Ricker amplitude spectrum ∝ (f/fp)² exp(−(f/fp)²) is negligible beyond 5 fp.
    dt = 1 / (40 * w.peakHz);
    const n = Math.ceil((2 * defaultRickerShiftS(w.peakHz)) / dt) + 1;
    samples = sampleWavelet({ kind: "ricker", peakHz: w.peakHz, shiftS: defaultRickerShiftS(w.peakHz) }, 0, dt, n);
    fNyq = 5 * w.peakHz;
  } else {
    dt = w.intervalS;
    samples = w.samples;
    fNyq = 0.5 / dt;
  }
  const nf = 512;
  const amp = new Float64Array(nf + 1);
  let maxA = 0;
  let peak = 0;
  for (let k = 0; k <= nf; k++) {
    const fr = (k / nf) * fNyq;
    let re = 0;
    let im = 0;
    for (let n = 0; n < samples.length; n++) {
      const ph = 2 * Math.PI * fr * n * dt;
      re += samples[n] * Math.cos(ph);
      im -= samples[n] * Math.sin(ph);
    }
    amp[k] = Math.hypot(re, im);
    if (amp[k] > maxA) {
      maxA = amp[k];
      peak = fr;
    }
  }
  let maxHz = 0;
  for (let k = nf; k >= 0; k--) {
    if (amp[k] >= floor * maxA) {
      maxHz = (k / nf) * fNyq;
      break;
    }
  }
  return { peakHz: peak, maxHz };
}
