/**
 * Mutes on trace blocks (`[trace][sample]`): zero samples before a top-mute line, after a
 * bottom-mute line, or inside a surgical window, with cosine tapers.
 *
 * The taper always lies on the muted side of a line, so no sample at or after a top-mute line
 * (at or before a bottom-mute line, outside a window) is changed. Line times are per trace in
 * seconds relative to the source instant; NaN means "no line on this trace".
 */
import { assertFinite, assertTraceBlock } from "./taper";

/** Mute lines for one block; each array holds one time per trace (s), NaN where not applied. */
export interface MuteLines {
  top?: Float32Array;
  bottom?: Float32Array;
  windows?: Array<{ start: Float32Array; end: Float32Array }>;
}

/** Straight mute line t(x) = intercept + |offset| / velocity for each offset (s). */
export function linearMuteLine(offsetsM: ArrayLike<number>, interceptS: number, velocityMps: number): Float32Array {
  assertFinite("interceptS", interceptS);
  assertFinite("velocityMps", velocityMps);
  if (!(velocityMps > 0)) throw new RangeError(`velocityMps must be positive, got ${velocityMps}`);
  const out = new Float32Array(offsetsM.length);
  for (let i = 0; i < offsetsM.length; i++) out[i] = interceptS + Math.abs(offsetsM[i]) / velocityMps;
  return out;
}

/**
 * Line time → fractional sample index. Line times travel as float32 (the mute artifact), so a
 * line meant to fall on a sample can land 1e-7 of a sample off; snap those to the sample.
 */
function samplePosition(timeS: number, startTimeS: number, sampleIntervalS: number): number {
  const x = (timeS - startTimeS) / sampleIntervalS;
  const r = Math.round(x);
  return Math.abs(x - r) < 1e-4 ? r : x;
}

function rise(u: number): number {
  // Cosine ramp from 0 at u = 0 to 1 at u = 1.
  return 0.5 * (1 - Math.cos(Math.PI * u));
}

/**
 * Applies the mute lines; returns the muted samples and how many traces lost at least one sample.
 * @param taperS cosine taper length, s (0 for a hard mute)
 */
export function applyMutes(
  data: Float32Array,
  traceCount: number,
  sampleCount: number,
  startTimeS: number,
  sampleIntervalS: number,
  lines: MuteLines,
  taperS: number,
  out?: Float32Array,
): { data: Float32Array; mutedTraces: number } {
  assertTraceBlock(data, traceCount, sampleCount);
  assertFinite("startTimeS", startTimeS);
  assertFinite("taperS", taperS);
  if (!(sampleIntervalS > 0)) throw new RangeError(`sampleIntervalS must be positive, got ${sampleIntervalS}`);
  if (taperS < 0) throw new RangeError(`taperS must be zero or positive, got ${taperS}`);
  for (const [name, arr] of [["top", lines.top], ["bottom", lines.bottom]] as const) {
    if (arr && arr.length !== traceCount) throw new RangeError(`${name} line must hold ${traceCount} times, got ${arr.length}`);
  }
  for (const w of lines.windows ?? []) {
    if (w.start.length !== traceCount || w.end.length !== traceCount) throw new RangeError(`window lines must hold ${traceCount} times each`);
  }
  const result = out ?? new Float32Array(data.length);
  if (result.length !== data.length) throw new RangeError(`out must hold ${data.length} samples, got ${result.length}`);
  const taper = taperS / sampleIntervalS; // in samples
  let mutedTraces = 0;
  const windows = lines.windows ?? [];
  const edges = new Float64Array(2 * windows.length);
  for (let t = 0; t < traceCount; t++) {
    const base = t * sampleCount;
    // Line positions as fractional sample indices.
    const top = lines.top ? samplePosition(lines.top[t], startTimeS, sampleIntervalS) : NaN;
    const bottom = lines.bottom ? samplePosition(lines.bottom[t], startTimeS, sampleIntervalS) : NaN;
    for (let k = 0; k < windows.length; k++) {
      edges[2 * k] = samplePosition(windows[k].start[t], startTimeS, sampleIntervalS);
      edges[2 * k + 1] = samplePosition(windows[k].end[t], startTimeS, sampleIntervalS);
    }
    let touched = false;
    for (let i = 0; i < sampleCount; i++) {
      let w = 1;
      if (top === top && i < top) w *= taper > 0 && i > top - taper ? rise((i - (top - taper)) / taper) : 0;
      if (bottom === bottom && i > bottom) w *= taper > 0 && i < bottom + taper ? rise((bottom + taper - i) / taper) : 0;
      for (let k = 0; k < windows.length; k++) {
        const a = edges[2 * k];
        const b = edges[2 * k + 1];
        if (!(a === a && b === b) || i < a || i > b) continue;
        // Inside the window: ramps down from its start and up towards its end.
        const ramp = Math.min(taper, (b - a) / 2);
        const fromEdge = Math.min(i - a, b - i);
        w *= ramp > 0 && fromEdge < ramp ? rise(1 - fromEdge / ramp) : 0;
      }
      if (w < 1) touched = true;
      result[base + i] = data[base + i] * w;
    }
    if (touched) mutedTraces++;
  }
  return { data: result, mutedTraces };
}
