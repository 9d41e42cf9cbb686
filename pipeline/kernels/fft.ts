/**
 * Thin helpers over fft.js 4.0.4 (radix-4 FFT, general-purpose): real-input spectra and
 * circular convolution with a fixed kernel, on Float64 buffers allocated once per plan.
 */
import FFT from "fft.js";

/** Smallest power of two ≥ n (and ≥ 4, fft.js's smallest useful size). */
export function nextPowerOfTwo(n: number): number {
  let p = 4;
  while (p < n) p *= 2;
  return p;
}

/** An FFT of fixed size with its work buffers (interleaved complex: re, im, re, im, …). */
export interface FftPlan {
  size: number;
  fft: FFT;
  /** Real input, zero-padded to `size`. */
  input: Float64Array;
  /** Complex spectrum, 2 · size values. */
  spectrum: Float64Array;
  /** Complex time series, 2 · size values (inverse transform output). */
  complexTime: Float64Array;
}

/** Creates a plan for transforms of `size` (a power of two). */
export function createFftPlan(size: number): FftPlan {
  if (!Number.isInteger(size) || size < 4 || (size & (size - 1)) !== 0) {
    throw new RangeError(`size must be a power of two ≥ 4, got ${size}`);
  }
  return {
    size,
    fft: new FFT(size),
    input: new Float64Array(size),
    spectrum: new Float64Array(2 * size),
    complexTime: new Float64Array(2 * size),
  };
}

/** Transforms `plan.input` (real) into `plan.spectrum` (full complex spectrum). */
export function forwardReal(plan: FftPlan): void {
  plan.fft.realTransform(plan.spectrum, plan.input);
  plan.fft.completeSpectrum(plan.spectrum);
}

/**
 * Linear convolution of real `signal` (length n) with a kernel whose spectrum (size ≥ 2n,
 * from {@link forwardReal}) is `kernelSpectrum`; writes the first n samples to `out`.
 */
export function convolveWithSpectrum(plan: FftPlan, kernelSpectrum: Float64Array, signal: ArrayLike<number>, n: number, out: Float64Array): void {
  const { input, spectrum, complexTime, size } = plan;
  if (2 * n > size) throw new RangeError(`FFT size ${size} is too small for a linear convolution of ${n} samples`);
  for (let i = 0; i < n; i++) input[i] = signal[i];
  input.fill(0, n);
  forwardReal(plan);
  for (let k = 0; k < 2 * size; k += 2) {
    const re = spectrum[k] * kernelSpectrum[k] - spectrum[k + 1] * kernelSpectrum[k + 1];
    const im = spectrum[k] * kernelSpectrum[k + 1] + spectrum[k + 1] * kernelSpectrum[k];
    spectrum[k] = re;
    spectrum[k + 1] = im;
  }
  plan.fft.inverseTransform(complexTime, spectrum);
  for (let i = 0; i < n; i++) out[i] = complexTime[2 * i];
}
