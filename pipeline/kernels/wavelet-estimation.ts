/**
 * Source-wavelet estimation by stabilised least-squares deconvolution in the frequency domain
 * (Pratt 1999, "Seismic waveform inversion in the frequency domain, Part 1", Geophysics 64;
 * the least-squares source estimate of its frequency-domain formulation): with s_t the synthetics of trace t computed with the current wavelet w₀ (or with a unit
 * impulse, w₀ = [1, 0, 0, …]) and d_t the observed traces, the correction filter
 *
 *   C(f) = Σ_t a_t d_t(f) s̄_t(f) / (Σ_t a_t |s_t(f)|² + ε),   ε = waterLevel · max_f Σ_t a_t |s_t(f)|²
 *
 * minimises Σ_t a_t ‖d_t − c ∗ s_t‖² + ε ‖c‖² (a_t the per-trace weights, e.g. by offset), and the
 * new wavelet is w = c ∗ w₀, i.e. W(f) = C(f)·W₀(f). Sums run over the traces of the block given:
 * pass the traces of one shot for a wavelet per shot, or the traces of all shots one after another
 * for one shared wavelet.
 *
 * Both d and s are cut to the sample window [firstSample, endSample), multiplied by a cosine taper
 * of `taperMs` at both window edges, and zero-padded to a power of two at or above
 * 2·(window length + wavelet length), so no circular wrap-around reaches the correlation of the
 * window or the convolution with w₀. The new wavelet keeps the length and sampling of w₀ and is
 * causal: its samples are those of c ∗ w₀ at t = 0 … (L − 1)·dt; whatever the division puts at
 * negative times (it should put nothing there when the synthetics are right) is dropped.
 *
 * The fit is the relative residual √(Σ a‖d − c ∗ s‖² / Σ a‖d‖²) of the windowed, tapered traces,
 * evaluated per frequency (Parseval) with the full correction filter.
 */
import { createFftPlan, forwardReal, nextPowerOfTwo } from "./fft";
import { cascadeResponse } from "./butterworth";
import { assertTraceBlock, cosineRampWeight } from "./taper";

/** Arguments of {@link estimateWavelet}. */
export interface WaveletEstimationArgs {
  /** Observed samples `[trace][sample]`. */
  observed: Float32Array | Float64Array;
  /** Synthetic samples `[trace][sample]`, computed with `currentWavelet`; same layout and sampling. */
  synthetic: Float32Array | Float64Array;
  traceCount: number;
  sampleCount: number;
  /** Wavelet the synthetics were computed with, samples from t = 0 (a unit impulse for impulse responses). */
  currentWavelet: Float32Array | Float64Array;
  /** Sample interval of traces and wavelet, s. */
  sampleIntervalS: number;
  /** Water level ε as a fraction of the peak of Σ a|s(f)|². @default 1e-3 */
  waterLevel?: number;
  /** Per-trace weights (e.g. by offset), ≥ 0; 0 leaves a trace out. @default all 1 */
  weights?: Float32Array | Float64Array;
  /** First sample of the window. @default 0 */
  firstSample?: number;
  /** One past the last sample of the window. @default sampleCount */
  endSample?: number;
  /** Cosine taper at both edges of the window, ms (shortened to half the window if longer). @default 0 */
  taperMs?: number;
}

/** Result of {@link estimateWavelet}. */
export interface WaveletEstimate {
  /** New wavelet, same length and sample interval as the current one, from t = 0. */
  wavelet: Float64Array;
  /** Relative residual with the new wavelet, √(Σ a‖d − c∗s‖² / Σ a‖d‖²). */
  fit: number;
  /** Relative residual with the current wavelet, √(Σ a‖d − s‖² / Σ a‖d‖²). */
  fitBefore: number;
}

export const DEFAULT_WATER_LEVEL = 1e-3;

/** Estimates the source wavelet (see the module comment). Inputs are not mutated. */
export function estimateWavelet(a: WaveletEstimationArgs): WaveletEstimate {
  const { traceCount, sampleCount, observed, synthetic, currentWavelet } = a;
  assertTraceBlock(observed, traceCount, sampleCount);
  if (synthetic.length !== observed.length) throw new RangeError(`synthetic must hold ${observed.length} samples like observed, got ${synthetic.length}`);
  const waveletLength = currentWavelet.length;
  if (waveletLength < 1) throw new RangeError(`currentWavelet must hold at least one sample, got ${waveletLength}`);
  if (!(a.sampleIntervalS > 0 && Number.isFinite(a.sampleIntervalS))) throw new RangeError(`sampleIntervalS must be a positive number, got ${a.sampleIntervalS}`);
  const waterLevel = a.waterLevel ?? DEFAULT_WATER_LEVEL;
  if (!(waterLevel >= 0 && Number.isFinite(waterLevel))) throw new RangeError(`waterLevel must be a number ≥ 0, got ${waterLevel}`);
  const first = a.firstSample ?? 0;
  const end = a.endSample ?? sampleCount;
  if (!Number.isInteger(first) || !Number.isInteger(end) || first < 0 || end > sampleCount || end - first < 1) {
    throw new RangeError(`window [${first}, ${end}) must hold at least one whole sample inside [0, ${sampleCount}]`);
  }
  const taperMs = a.taperMs ?? 0;
  if (!(taperMs >= 0 && Number.isFinite(taperMs))) throw new RangeError(`taperMs must be a number ≥ 0, got ${taperMs}`);
  if (a.weights && a.weights.length !== traceCount) throw new RangeError(`weights must hold ${traceCount} values, got ${a.weights.length}`);
  if (a.weights) for (let t = 0; t < traceCount; t++) if (!(a.weights[t] >= 0)) throw new RangeError(`weights[${t}] must be ≥ 0, got ${a.weights[t]}`);

  const span = end - first;
  const taperSamples = Math.min(Math.round(taperMs / 1000 / a.sampleIntervalS), Math.floor(span / 2));
  const window = new Float64Array(span);
  for (let k = 0; k < span; k++) window[k] = cosineRampWeight(k, taperSamples) * cosineRampWeight(span - 1 - k, taperSamples);

  const size = nextPowerOfTwo(2 * (span + waveletLength));
  const plan = createFftPlan(size);
  const bins = size / 2 + 1; // real input: the other half is the conjugate mirror
  const numRe = new Float64Array(bins);
  const numIm = new Float64Array(bins);
  const powerS = new Float64Array(bins);
  const powerD = new Float64Array(bins);
  const dRe = new Float64Array(bins);
  const dIm = new Float64Array(bins);
  for (let t = 0; t < traceCount; t++) {
    const w = a.weights ? a.weights[t] : 1;
    if (w === 0) continue;
    const base = t * sampleCount + first;
    plan.input.fill(0);
    for (let k = 0; k < span; k++) plan.input[k] = observed[base + k] * window[k];
    forwardReal(plan);
    for (let f = 0; f < bins; f++) {
      dRe[f] = plan.spectrum[2 * f];
      dIm[f] = plan.spectrum[2 * f + 1];
    }
    plan.input.fill(0);
    for (let k = 0; k < span; k++) plan.input[k] = synthetic[base + k] * window[k];
    forwardReal(plan);
    for (let f = 0; f < bins; f++) {
      const sRe = plan.spectrum[2 * f];
      const sIm = plan.spectrum[2 * f + 1];
      // d·s̄
      numRe[f] += w * (dRe[f] * sRe + dIm[f] * sIm);
      numIm[f] += w * (dIm[f] * sRe - dRe[f] * sIm);
      powerS[f] += w * (sRe * sRe + sIm * sIm);
      powerD[f] += w * (dRe[f] * dRe[f] + dIm[f] * dIm[f]);
    }
  }
  let peak = 0;
  for (let f = 0; f < bins; f++) peak = Math.max(peak, powerS[f]);
  if (!(peak > 0)) throw new RangeError("synthetic has no energy in the window on any weighted trace: the wavelet cannot be estimated");
  const epsilon = waterLevel * peak;

  // Residual per frequency: Σa|d − Cs|² = Σa|d|² − 2 Re(C̄ N) + |C|² Σa|s|², N = Σa d s̄; both halves of
  // the spectrum count, so interior bins twice (Parseval for real signals).
  const cRe = new Float64Array(bins);
  const cIm = new Float64Array(bins);
  let residual = 0;
  let before = 0;
  let energy = 0;
  for (let f = 0; f < bins; f++) {
    const den = powerS[f] + epsilon;
    cRe[f] = den > 0 ? numRe[f] / den : 0;
    cIm[f] = den > 0 ? numIm[f] / den : 0;
    const mult = f === 0 || f === bins - 1 ? 1 : 2;
    const r = powerD[f] - 2 * (cRe[f] * numRe[f] + cIm[f] * numIm[f]) + (cRe[f] ** 2 + cIm[f] ** 2) * powerS[f];
    residual += mult * Math.max(0, r);
    before += mult * Math.max(0, powerD[f] - 2 * numRe[f] + powerS[f]);
    energy += mult * powerD[f];
  }

  // W = C·W₀, back to time; keep t = 0 … L − 1.
  plan.input.fill(0);
  for (let k = 0; k < waveletLength; k++) plan.input[k] = currentWavelet[k];
  forwardReal(plan);
  const sp = plan.spectrum;
  for (let f = 0; f < bins; f++) {
    const re = sp[2 * f] * cRe[f] - sp[2 * f + 1] * cIm[f];
    const im = sp[2 * f] * cIm[f] + sp[2 * f + 1] * cRe[f];
    sp[2 * f] = re;
    sp[2 * f + 1] = im;
    if (f > 0 && f < bins - 1) {
      sp[2 * (size - f)] = re;
      sp[2 * (size - f) + 1] = -im;
    }
  }
  plan.fft.inverseTransform(plan.complexTime, sp);
  const wavelet = new Float64Array(waveletLength);
  for (let k = 0; k < waveletLength; k++) wavelet[k] = plan.complexTime[2 * k];
  return {
    wavelet,
    fit: energy > 0 ? Math.sqrt(residual / energy) : 0,
    fitBefore: energy > 0 ? Math.sqrt(before / energy) : 0,
  };
}

/**
 * Band-limits a wavelet: its spectrum is kept below `passHz`, faded out with a raised-cosine
 * (Hann) taper between `passHz` and `stopHz`, and removed above (common practice for keeping an
 * estimated wavelet inside the band of the data it was estimated from). A deconvolved wavelet
 * otherwise carries small, noisy energy far above that band, which makes the solver's accuracy
 * check (points per wavelength at the wavelet's highest frequency) refuse slow cells the data
 * cannot resolve anyway. The samples are zero-padded to at least twice their length, so the
 * filtering does not wrap around. Returns a new array of the same length.
 */
export function bandLimitWavelet(samples: ArrayLike<number>, sampleIntervalS: number, passHz: number, stopHz: number): Float64Array {
  if (!(sampleIntervalS > 0 && Number.isFinite(sampleIntervalS))) throw new RangeError(`sampleIntervalS must be a positive number, got ${sampleIntervalS}`);
  if (!(passHz > 0 && Number.isFinite(passHz))) throw new RangeError(`passHz must be a positive number, got ${passHz}`);
  if (!(stopHz > passHz && Number.isFinite(stopHz))) throw new RangeError(`stopHz must be a number above passHz (${passHz}), got ${stopHz}`);
  const n = samples.length;
  const out = new Float64Array(n);
  if (n === 0) return out;
  const size = nextPowerOfTwo(2 * n);
  const plan = createFftPlan(size);
  for (let k = 0; k < n; k++) plan.input[k] = samples[k];
  forwardReal(plan);
  const sp = plan.spectrum;
  const df = 1 / (size * sampleIntervalS);
  for (let k = 0; k < size; k++) {
    const f = (k <= size / 2 ? k : size - k) * df;
    const weight = f <= passHz ? 1 : f >= stopHz ? 0 : 0.5 * (1 + Math.cos((Math.PI * (f - passHz)) / (stopHz - passHz)));
    sp[2 * k] *= weight;
    sp[2 * k + 1] *= weight;
  }
  plan.fft.inverseTransform(plan.complexTime, sp);
  for (let k = 0; k < n; k++) out[k] = plan.complexTime[2 * k];
  return out;
}

/**
 * A wavelet seen through one causal filter moved to another: W·H_to/H_from in the frequency
 * domain (both cascades as butterworth.ts builds them, at the wavelet's sampling), zero where
 * |H_from| is below `floor` (there the wavelet holds nothing to move). For a wavelet estimated
 * against data filtered with H_from, the same source estimate as data filtered with H_to would
 * show it, without anything new above the old band. Zero-padded to twice the length, so the
 * circular wrap of the correction stays small.
 */
export function refilterWavelet(samples: ArrayLike<number>, sampleIntervalS: number, from: Float64Array, to: Float64Array, floor = 0.05): Float64Array {
  if (!(sampleIntervalS > 0 && Number.isFinite(sampleIntervalS))) throw new RangeError(`sampleIntervalS must be a positive number, got ${sampleIntervalS}`);
  if (!(floor > 0 && floor < 1)) throw new RangeError(`floor must lie in (0, 1), got ${floor}`);
  const n = samples.length;
  const out = new Float64Array(n);
  if (n === 0) return out;
  const size = nextPowerOfTwo(2 * n);
  const plan = createFftPlan(size);
  for (let k = 0; k < n; k++) plan.input[k] = samples[k];
  forwardReal(plan);
  const sp = plan.spectrum;
  const fs = 1 / sampleIntervalS;
  const df = fs / size;
  for (let k = 0; k < size; k++) {
    const f = (k <= size / 2 ? k : k - size) * df;
    const [fr, fi] = cascadeResponse(from, f, fs);
    const m = Math.hypot(fr, fi);
    if (m < floor) {
      sp[2 * k] = 0;
      sp[2 * k + 1] = 0;
      continue;
    }
    const [tr, ti] = cascadeResponse(to, f, fs);
    // H_to / H_from
    const d = fr * fr + fi * fi;
    const gr = (tr * fr + ti * fi) / d;
    const gi = (ti * fr - tr * fi) / d;
    const a = sp[2 * k];
    const b = sp[2 * k + 1];
    sp[2 * k] = a * gr - b * gi;
    sp[2 * k + 1] = a * gi + b * gr;
  }
  plan.fft.inverseTransform(plan.complexTime, sp);
  for (let k = 0; k < n; k++) out[k] = plan.complexTime[2 * k];
  return out;
}

/**
 * Frequency at which a Butterworth low-pass of `order` poles and corner `cornerHz` falls to
 * `level` of its pass-band amplitude: |H(f)| = 1/√(1 + (f/fc)^(2n)) (Butterworth 1930), so
 * f = fc · (1/level² − 1)^(1/(2n)).
 */
export function butterworthLevelHz(cornerHz: number, order: number, level: number): number {
  if (!(cornerHz > 0)) throw new RangeError(`cornerHz must be positive, got ${cornerHz}`);
  if (!(Number.isInteger(order) && order >= 1)) throw new RangeError(`order must be an integer ≥ 1, got ${order}`);
  if (!(level > 0 && level < 1)) throw new RangeError(`level must lie in (0, 1), got ${level}`);
  return cornerHz * (1 / (level * level) - 1) ** (1 / (2 * order));
}
