/**
 * Frequency filtering of trace blocks: Butterworth low-, high- or band-pass, an optional notch
 * comb for mains hum, cosine tapers at the trace ends, causal or zero-phase application.
 *
 * Data layout: flat row-major `[trace][sample]` Float32Array. Work is done per trace in a Float64
 * buffer; inputs are not mutated.
 *
 * Zero-phase filtering runs the cascade forward and then backward in time: the phase cancels and
 * the magnitude response is squared, so the effective order doubles (a 4th-order band-pass run
 * zero-phase falls off like an 8th-order one and is −6 dB, not −3 dB, at its corners).
 * The band-pass is the cascade of a Butterworth high-pass at the low corner and a Butterworth
 * low-pass at the high corner (common practice in seismic processing), so its response is the
 * product of the two.
 */
import {
  assertSections,
  butterworthHighPass,
  butterworthLowPass,
  concatSections,
  notchSection,
  runCascadeBackward,
  runCascadeForward,
} from "./butterworth";
import { assertCount, assertFinite, assertTraceBlock, taperEndsInPlace } from "./taper";

/** Pass band shape. "none" leaves only the notches (if any). */
export type PassBand = "band-pass" | "low-pass" | "high-pass" | "none";

/** What to filter, in physical units; plain data so it can cross to a worker. */
export interface FrequencyFilterDesign {
  passBand: PassBand;
  /** Low corner (high-pass part), Hz; used by band-pass and high-pass. */
  lowCutHz: number;
  /** High corner (low-pass part), Hz; used by band-pass and low-pass. */
  highCutHz: number;
  /** Butterworth order of each part, per pass. */
  order: number;
  /** Forward and backward (true) or forward only (false). */
  zeroPhase: boolean;
  /** Notch centres, Hz (e.g. 50, 100, 150); each must lie below Nyquist. */
  notchesHz: number[];
  /** −3 dB width of each notch, Hz. */
  notchWidthHz: number;
}

/** A design turned into coefficients for one sample interval. */
export interface FilterPlan {
  sections: Float64Array;
  zeroPhase: boolean;
  /** Zeros appended after each trace so the forward pass rings out before the backward pass. */
  padSamples: number;
}

/**
 * Turns a design into biquad coefficients for `sampleIntervalS`.
 * Throws RangeError naming the corner when it lies at or above Nyquist.
 */
export function planFrequencyFilter(design: FrequencyFilterDesign, sampleIntervalS: number, sampleCount: number): FilterPlan {
  assertFinite("sampleIntervalS", sampleIntervalS);
  if (!(sampleIntervalS > 0)) throw new RangeError(`sampleIntervalS must be positive, got ${sampleIntervalS}`);
  assertCount("sampleCount", sampleCount);
  const fs = 1 / sampleIntervalS;
  const nyquist = fs / 2;
  const parts: Float64Array[] = [];
  // Ring-down estimate: a Butterworth section of corner fc decays within about order/(π fc);
  // a notch of width w within 3/(π w) (three time constants of its pole radius).
  let ringS = 0;
  const needLow = design.passBand === "band-pass" || design.passBand === "high-pass";
  const needHigh = design.passBand === "band-pass" || design.passBand === "low-pass";
  if (needLow) {
    if (!(design.lowCutHz < nyquist)) {
      throw new RangeError(`lowCutHz ${design.lowCutHz} Hz must lie below the Nyquist frequency ${nyquist} Hz`);
    }
    parts.push(butterworthHighPass(design.order, design.lowCutHz, fs));
    ringS = Math.max(ringS, design.order / (Math.PI * design.lowCutHz));
  }
  if (needHigh) {
    if (!(design.highCutHz < nyquist)) {
      throw new RangeError(`highCutHz ${design.highCutHz} Hz must lie below the Nyquist frequency ${nyquist} Hz`);
    }
    parts.push(butterworthLowPass(design.order, design.highCutHz, fs));
    ringS = Math.max(ringS, design.order / (Math.PI * design.highCutHz));
  }
  if (design.passBand === "band-pass" && !(design.lowCutHz < design.highCutHz)) {
    throw new RangeError(`lowCutHz ${design.lowCutHz} Hz must lie below highCutHz ${design.highCutHz} Hz`);
  }
  for (const centre of design.notchesHz) {
    if (!(centre < nyquist)) throw new RangeError(`notch at ${centre} Hz must lie below the Nyquist frequency ${nyquist} Hz`);
    parts.push(notchSection(centre, design.notchWidthHz, fs));
    ringS = Math.max(ringS, 3 / (Math.PI * design.notchWidthHz));
  }
  const sections = concatSections(...parts);
  const padSamples = design.zeroPhase ? Math.min(Math.ceil(ringS / sampleIntervalS), 2 * sampleCount) : 0;
  return { sections, zeroPhase: design.zeroPhase, padSamples };
}

/** Arguments of {@link filterTraces}. */
export interface FilterTracesArgs {
  /** Samples, `[trace][sample]`. */
  data: Float32Array;
  traceCount: number;
  sampleCount: number;
  plan: FilterPlan;
  /** Cosine taper at each trace end before filtering, samples. */
  taperSamples: number;
}

/**
 * Filters every trace of a block; returns a new array (or fills `out`).
 * Per trace: copy to Float64 → cosine taper both ends → pad zeros → cascade forward
 * (→ backward when zero-phase) → copy back.
 */
export function filterTraces(args: FilterTracesArgs, out?: Float32Array): Float32Array {
  const { data, traceCount, sampleCount, plan, taperSamples } = args;
  assertTraceBlock(data, traceCount, sampleCount);
  assertSections(plan.sections);
  assertCount("taperSamples", taperSamples);
  assertCount("padSamples", plan.padSamples);
  const result = out ?? new Float32Array(data.length);
  if (result.length !== data.length) throw new RangeError(`out must hold ${data.length} samples, got ${result.length}`);
  const span = sampleCount + plan.padSamples;
  const work = new Float64Array(span);
  for (let t = 0; t < traceCount; t++) {
    const base = t * sampleCount;
    for (let i = 0; i < sampleCount; i++) work[i] = data[base + i];
    work.fill(0, sampleCount);
    taperEndsInPlace(work, 0, sampleCount, taperSamples);
    runCascadeForward(plan.sections, work, 0, span);
    if (plan.zeroPhase) runCascadeBackward(plan.sections, work, 0, span);
    for (let i = 0; i < sampleCount; i++) result[base + i] = work[i];
  }
  return result;
}

/**
 * Notch centres for mains hum: the fundamental and its harmonics up to `count` lines in all,
 * keeping those below `maxHz` (normally a little under Nyquist).
 */
export function mainsHumLines(fundamentalHz: number, count: number, maxHz: number): number[] {
  assertFinite("fundamentalHz", fundamentalHz);
  assertCount("count", count);
  const lines: number[] = [];
  for (let h = 1; h <= count; h++) {
    const f = h * fundamentalHz;
    if (f < maxHz) lines.push(f);
  }
  return lines;
}
