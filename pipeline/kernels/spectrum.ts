/**
 * Amplitude spectra of trace blocks (`[trace][sample]`) by FFT (fft.js), after a cosine (Tukey)
 * taper of both ends, zero-padded to the next power of two.
 *
 * Scale: |X(f)| · Δt, the discrete approximation of the continuous Fourier amplitude, in the
 * data's unit times seconds; a sine of amplitude A lasting D seconds peaks near A · D / 2.
 * Frequencies run from 0 to Nyquist (or `maxFrequencyHz`) in steps of 1 / (nfft · Δt).
 */
import { createFftPlan, forwardReal, nextPowerOfTwo } from "./fft";
import { assertFinite, assertTraceBlock, taperEndsInPlace } from "./taper";

/** Spectra of a block. */
export interface BlockSpectra {
  /** Frequency axis, Hz. */
  frequenciesHz: Float32Array;
  /** Amplitude per trace, `[trace][frequency]`. */
  perTrace: Float32Array;
}

/** Frequency axis of {@link amplitudeSpectra} for these settings (same for every block). */
export function spectrumFrequencies(sampleCount: number, sampleIntervalS: number, maxFrequencyHz = Infinity): Float32Array {
  const nfft = nextPowerOfTwo(Math.max(sampleCount, 4));
  const df = 1 / (nfft * sampleIntervalS);
  const nyquistBins = nfft / 2 + 1;
  const count = Math.min(nyquistBins, Math.floor(maxFrequencyHz / df + 1e-9) + 1);
  const f = new Float32Array(count);
  for (let k = 0; k < count; k++) f[k] = k * df;
  return f;
}

/**
 * Amplitude spectra of each trace.
 * @param taperFraction share of the trace tapered at each end (0 … 0.5), e.g. 0.05
 * @param maxFrequencyHz keep frequencies up to this (default: Nyquist)
 */
export function amplitudeSpectra(
  data: Float32Array,
  traceCount: number,
  sampleCount: number,
  sampleIntervalS: number,
  taperFraction: number,
  maxFrequencyHz = Infinity,
): BlockSpectra {
  assertTraceBlock(data, traceCount, sampleCount);
  assertFinite("sampleIntervalS", sampleIntervalS);
  if (!(sampleIntervalS > 0)) throw new RangeError(`sampleIntervalS must be positive, got ${sampleIntervalS}`);
  assertFinite("taperFraction", taperFraction);
  if (taperFraction < 0 || taperFraction > 0.5) throw new RangeError(`taperFraction must lie in [0, 0.5], got ${taperFraction}`);
  if (!(maxFrequencyHz > 0)) throw new RangeError(`maxFrequencyHz must be positive, got ${maxFrequencyHz}`);
  const frequenciesHz = spectrumFrequencies(sampleCount, sampleIntervalS, maxFrequencyHz);
  const nf = frequenciesHz.length;
  const perTrace = new Float32Array(traceCount * nf);
  if (sampleCount === 0) return { frequenciesHz, perTrace };
  const plan = createFftPlan(nextPowerOfTwo(Math.max(sampleCount, 4)));
  const taperSamples = Math.round(taperFraction * sampleCount);
  for (let t = 0; t < traceCount; t++) {
    const base = t * sampleCount;
    for (let i = 0; i < sampleCount; i++) plan.input[i] = data[base + i];
    plan.input.fill(0, sampleCount);
    taperEndsInPlace(plan.input, 0, sampleCount, taperSamples);
    forwardReal(plan);
    for (let k = 0; k < nf; k++) {
      const re = plan.spectrum[2 * k];
      const im = plan.spectrum[2 * k + 1];
      perTrace[t * nf + k] = Math.hypot(re, im) * sampleIntervalS;
    }
  }
  return { frequenciesHz, perTrace };
}

/** Mean spectrum over the traces whose `include` flag is set; zeros when none is. */
export function meanSpectrum(perTrace: Float32Array, traceCount: number, frequencyCount: number, include: ArrayLike<boolean>): Float32Array {
  if (perTrace.length !== traceCount * frequencyCount) throw new RangeError(`perTrace must hold ${traceCount * frequencyCount} values, got ${perTrace.length}`);
  const sum = new Float64Array(frequencyCount);
  let n = 0;
  for (let t = 0; t < traceCount; t++) {
    if (!include[t]) continue;
    n++;
    for (let k = 0; k < frequencyCount; k++) sum[k] += perTrace[t * frequencyCount + k];
  }
  const mean = new Float32Array(frequencyCount);
  if (n > 0) for (let k = 0; k < frequencyCount; k++) mean[k] = sum[k] / n;
  return mean;
}
