/**
 * Amplitude gain and normalisation of trace blocks (`[trace][sample]`, Float32Array):
 * per-trace normalisation by maximum or RMS, automatic gain control (AGC) over a sliding window,
 * and time-power gain t^p. Inputs are not mutated; each function returns a new array or fills `out`.
 */
import { assertCount, assertFinite, assertTraceBlock } from "./taper";

function output(data: Float32Array, out?: Float32Array): Float32Array {
  const result = out ?? new Float32Array(data.length);
  if (result.length !== data.length) throw new RangeError(`out must hold ${data.length} samples, got ${result.length}`);
  return result;
}

/** Per-trace normalisation measure. */
export type NormaliseBy = "max" | "rms";

/**
 * Scales each trace so its maximum absolute value (or its RMS) is 1.
 * Returns the output samples and the factor each trace was multiplied by (1 for all-zero
 * traces, which stay zero), so the scaling can be undone by dividing.
 */
export function normaliseTraces(
  data: Float32Array,
  traceCount: number,
  sampleCount: number,
  by: NormaliseBy,
  out?: Float32Array,
): { data: Float32Array; scales: Float64Array } {
  assertTraceBlock(data, traceCount, sampleCount);
  if (by !== "max" && by !== "rms") throw new RangeError(`by must be "max" or "rms", got ${String(by)}`);
  const result = output(data, out);
  const scales = new Float64Array(traceCount);
  for (let t = 0; t < traceCount; t++) {
    const base = t * sampleCount;
    let m = 0;
    if (by === "max") {
      for (let i = 0; i < sampleCount; i++) m = Math.max(m, Math.abs(data[base + i]));
    } else {
      let s = 0;
      for (let i = 0; i < sampleCount; i++) s += data[base + i] * data[base + i];
      m = sampleCount > 0 ? Math.sqrt(s / sampleCount) : 0;
    }
    const scale = m > 0 ? 1 / m : 1;
    scales[t] = scale;
    for (let i = 0; i < sampleCount; i++) result[base + i] = data[base + i] * scale;
  }
  return { data: result, scales };
}

/**
 * Automatic gain control: each sample divided by the RMS of its trace over a centred window of
 * `windowSamples` (odd or even; the window is cut at the trace ends). Running sums make it O(n).
 * A floor of 1e-6 of the trace's mean square keeps silent stretches from blowing up.
 */
export function agcTraces(
  data: Float32Array,
  traceCount: number,
  sampleCount: number,
  windowSamples: number,
  out?: Float32Array,
): Float32Array {
  assertTraceBlock(data, traceCount, sampleCount);
  assertCount("windowSamples", windowSamples);
  if (windowSamples < 1) throw new RangeError(`windowSamples must be at least 1, got ${windowSamples}`);
  const result = output(data, out);
  const prefix = new Float64Array(sampleCount + 1);
  const half = Math.floor(windowSamples / 2);
  for (let t = 0; t < traceCount; t++) {
    const base = t * sampleCount;
    for (let i = 0; i < sampleCount; i++) prefix[i + 1] = prefix[i] + data[base + i] * data[base + i];
    const floor = sampleCount > 0 ? 1e-6 * (prefix[sampleCount] / sampleCount) : 0;
    for (let i = 0; i < sampleCount; i++) {
      const lo = Math.max(0, i - half);
      const hi = Math.min(sampleCount, i - half + windowSamples);
      const meanSquare = (prefix[hi] - prefix[lo]) / (hi - lo);
      const denom = Math.sqrt(meanSquare + floor);
      result[base + i] = denom > 0 ? data[base + i] / denom : 0;
    }
  }
  return result;
}

/**
 * Time-power gain: sample at time t (s after the source instant) multiplied by t^power;
 * samples at or before time zero get t = 0 (zeroed for power > 0, kept for power = 0).
 */
export function timePowerTraces(
  data: Float32Array,
  traceCount: number,
  sampleCount: number,
  startTimeS: number,
  sampleIntervalS: number,
  power: number,
  out?: Float32Array,
): Float32Array {
  assertTraceBlock(data, traceCount, sampleCount);
  assertFinite("startTimeS", startTimeS);
  assertFinite("power", power);
  assertFinite("sampleIntervalS", sampleIntervalS);
  if (!(sampleIntervalS > 0)) throw new RangeError(`sampleIntervalS must be positive, got ${sampleIntervalS}`);
  if (power < 0) throw new RangeError(`power must be zero or positive, got ${power}`);
  const result = output(data, out);
  const gain = new Float64Array(sampleCount);
  for (let i = 0; i < sampleCount; i++) gain[i] = Math.pow(Math.max(0, startTimeS + i * sampleIntervalS), power);
  for (let t = 0; t < traceCount; t++) {
    const base = t * sampleCount;
    for (let i = 0; i < sampleCount; i++) result[base + i] = data[base + i] * gain[i];
  }
  return result;
}
