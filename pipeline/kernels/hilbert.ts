/**
 * Discrete analytic signal, Hilbert transform and envelope of real traces by FFT (fft.js through
 * ./fft.ts).
 *
 * The analytic signal z = x + i·H[x] is formed in the frequency domain: the spectrum X[k] of the
 * zero-padded trace is kept at k = 0 and at Nyquist, doubled at positive frequencies and zeroed at
 * negative ones, then transformed back (Marple 1999, "Computing the discrete-time analytic signal
 * via FFT", IEEE Trans. Signal Processing 47). The Hilbert transform is the imaginary part, with the
 * convention of the kernel 1/(πt): H[cos] = sin and H[sin] = −cos (Bracewell, The Fourier Transform
 * and Its Applications, defines the opposite sign; sources in tests/pipeline/kernels/misfit.test.ts);
 * the envelope (instantaneous amplitude) is |z|, the same in either convention.
 *
 * The discrete transform is circular: without padding, the end of a trace leaks into its start.
 * By default each trace is zero-padded to the power of two at or above twice its length, which
 * keeps the wrap-around out of the trace (edge effects of the finite trace itself remain, as they
 * must: the Hilbert kernel 1/(πt) is long).
 */
import { createFftPlan, forwardReal, nextPowerOfTwo, type FftPlan } from "./fft";
import { assertCount, assertTraceBlock } from "./taper";

/** An FFT plan and work buffers for analytic signals of traces of one length. */
export interface AnalyticSignalPlan {
  /** Samples per trace. */
  sampleCount: number;
  /** FFT size (power of two ≥ sampleCount). */
  fftSize: number;
  fft: FftPlan;
}

/**
 * Creates a plan for traces of `sampleCount` samples.
 * @param fftSize transform length, a power of two ≥ sampleCount; default the power of two at or
 *   above 2 · sampleCount (no circular wrap-around into the trace). Pass exactly sampleCount for a
 *   trace that is one period of a periodic signal.
 */
export function createAnalyticSignalPlan(sampleCount: number, fftSize = nextPowerOfTwo(2 * sampleCount)): AnalyticSignalPlan {
  assertCount("sampleCount", sampleCount);
  if (sampleCount < 1) throw new RangeError(`sampleCount must be at least 1, got ${sampleCount}`);
  if (!Number.isInteger(fftSize) || fftSize < sampleCount) {
    throw new RangeError(`fftSize must be an integer ≥ sampleCount (${sampleCount}), got ${String(fftSize)}`);
  }
  // createFftPlan checks that fftSize is a power of two ≥ 4.
  return { sampleCount, fftSize, fft: createFftPlan(fftSize) };
}

/**
 * Analytic signal of `trace[offset … offset + plan.sampleCount)`; writes its real part to `re` and
 * its imaginary part (the Hilbert transform) to `im` (each at least sampleCount long; either may be
 * omitted). No allocation.
 */
export function analyticSignalInto(
  plan: AnalyticSignalPlan,
  trace: ArrayLike<number>,
  offset: number,
  re: Float64Array | Float32Array | null,
  im: Float64Array | Float32Array | null,
): void {
  const { sampleCount: n, fftSize: size, fft } = plan;
  if (!Number.isInteger(offset) || offset < 0 || offset + n > trace.length) {
    throw new RangeError(`offset must be an integer in [0, ${trace.length - n}], got ${String(offset)}`);
  }
  if (re && re.length < n) throw new RangeError(`re must hold at least ${n} samples, got ${re.length}`);
  if (im && im.length < n) throw new RangeError(`im must hold at least ${n} samples, got ${im.length}`);
  const { input, spectrum, complexTime } = fft;
  for (let i = 0; i < n; i++) input[i] = trace[offset + i];
  input.fill(0, n);
  forwardReal(fft);
  // One-sided spectrum (Marple 1999): DC and Nyquist once, positive frequencies twice, negative zero.
  const half = size / 2;
  for (let k = 1; k < half; k++) {
    spectrum[2 * k] *= 2;
    spectrum[2 * k + 1] *= 2;
  }
  spectrum.fill(0, 2 * (half + 1));
  fft.fft.inverseTransform(complexTime, spectrum);
  if (re) for (let i = 0; i < n; i++) re[i] = complexTime[2 * i];
  if (im) for (let i = 0; i < n; i++) im[i] = complexTime[2 * i + 1];
}

/** Envelope |x + i·H[x]| of `trace[offset … offset + plan.sampleCount)` into `out`. No allocation. */
export function envelopeInto(plan: AnalyticSignalPlan, trace: ArrayLike<number>, offset: number, out: Float64Array | Float32Array): void {
  const n = plan.sampleCount;
  if (out.length < n) throw new RangeError(`out must hold at least ${n} samples, got ${out.length}`);
  analyticSignalInto(plan, trace, offset, null, null);
  const c = plan.fft.complexTime;
  for (let i = 0; i < n; i++) out[i] = Math.hypot(c[2 * i], c[2 * i + 1]);
}

/**
 * Hilbert transform of one trace (H[cos] = sin). Returns a new Float64Array.
 * @param fftSize see {@link createAnalyticSignalPlan}
 */
export function hilbertTransform(trace: ArrayLike<number>, fftSize?: number): Float64Array {
  const plan = createAnalyticSignalPlan(trace.length, fftSize);
  const out = new Float64Array(trace.length);
  analyticSignalInto(plan, trace, 0, null, out);
  return out;
}

/**
 * Envelopes of a block of traces `[trace][sample]`, in the data's unit. Returns a new
 * Float64Array of the same layout.
 * @param fftSize see {@link createAnalyticSignalPlan}
 */
export function traceEnvelopes(data: ArrayLike<number>, traceCount: number, sampleCount: number, fftSize?: number): Float64Array {
  assertTraceBlock(data, traceCount, sampleCount);
  const out = new Float64Array(traceCount * sampleCount);
  if (traceCount === 0 || sampleCount === 0) return out;
  const plan = createAnalyticSignalPlan(sampleCount, fftSize);
  for (let t = 0; t < traceCount; t++) envelopeInto(plan, data, t * sampleCount, out.subarray(t * sampleCount, (t + 1) * sampleCount));
  return out;
}
