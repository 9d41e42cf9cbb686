/**
 * First-arrival pickers on trace blocks (`[trace][sample]`, Float32Array) and a consistency
 * check of picks against offset.
 *
 * - Energy ratio (STA/LTA) on Allen's characteristic function (Allen 1978, BSSA 68,
 *   "Automatic earthquake recognition and timing from single traces"):
 *   e(i) = x(i)² + C · (x(i) − x(i−1))², C = Σ|x| / Σ|Δx| over the trace (the weighting of the
 *   derivative term as recalled from the paper: from memory). The short window leads the test
 *   sample and the long window trails it, so the ratio peaks where signal starts (a variant of
 *   Allen's trailing windows that removes the short window's delay). The first
 *   sample whose ratio reaches the trigger level opens a search of one short window for the
 *   ratio's maximum. With `pickAt: "ratio-peak"` that maximum is the pick. With `pickAt: "onset"`
 *   (default) the pick walks back from it to the last sample whose energy x² is at the noise level
 *   (at most {@link ONSET_NOISE_FACTOR} times the mean square of the long window before the short
 *   one), at most two short windows back: the ratio peaks where the short window is full of signal,
 *   which for a causal pulse (a hammer blow rises from zero at its onset) lies up to a short window
 *   after the onset.
 * - Information criterion (AIC) on the samples themselves (Maeda 1985, J. Seismol. Soc. Japan 38):
 *   AIC(k) = k · log var(x[1..k]) + (N − k − 1) · log var(x[k+1..N]); the pick is the first sample
 *   of the second segment at the minimum.
 *
 * Pick indices are sample indices within the trace (NaN: no pick). Quality is the energy ratio
 * after / before the pick on a log scale: q = clamp(log10(ratio) / 2, 0, 1), so 1 means at least
 * a hundred-fold (20 dB) rise in energy at the pick.
 */
import { assertCount, assertFinite, assertTraceBlock } from "./taper";

/** Picks for a block of traces. */
export interface TracePicks {
  /** Sample index of the pick per trace, NaN where nothing was picked. */
  index: Float64Array;
  /** Quality per trace in [0, 1] (0 where nothing was picked). */
  quality: Float64Array;
}

/** Settings shared by both pickers, in samples. */
export interface PickSearchWindow {
  /** First sample index searched. */
  searchStart: number;
  /** One past the last sample index searched. */
  searchEnd: number;
  /** Short (signal) window, samples. */
  shortSamples: number;
  /** Long (noise) window, samples. */
  longSamples: number;
  /**
   * Per-trace bounds inside [searchStart, searchEnd) (e.g. between the lines |offset|/fastest and
   * |offset|/slowest velocity): first searched sample and one past the last, one entry per trace of
   * the block. A trace whose bounds are empty gets no pick.
   */
  perTrace?: { start: Int32Array; end: Int32Array };
}

/** The search bounds of trace `t`: the window's, narrowed by its per-trace bounds. */
function traceBounds(w: PickSearchWindow, t: number): [number, number] {
  if (!w.perTrace) return [w.searchStart, w.searchEnd];
  return [Math.max(w.searchStart, w.perTrace.start[t]), Math.min(w.searchEnd, w.perTrace.end[t])];
}

function checkWindow(w: PickSearchWindow, sampleCount: number, traceCount?: number): void {
  assertCount("searchStart", w.searchStart);
  assertCount("searchEnd", w.searchEnd);
  assertCount("shortSamples", w.shortSamples);
  assertCount("longSamples", w.longSamples);
  if (w.shortSamples < 1) throw new RangeError(`shortSamples must be at least 1, got ${w.shortSamples}`);
  if (w.longSamples < w.shortSamples) throw new RangeError(`longSamples (${w.longSamples}) must not be shorter than shortSamples (${w.shortSamples})`);
  if (w.searchEnd > sampleCount || w.searchStart >= w.searchEnd) {
    throw new RangeError(`search window [${w.searchStart}, ${w.searchEnd}) must lie inside the trace of ${sampleCount} samples`);
  }
  if (w.perTrace && traceCount !== undefined && (w.perTrace.start.length !== traceCount || w.perTrace.end.length !== traceCount)) {
    throw new RangeError(`perTrace bounds must hold ${traceCount} entries each, got ${w.perTrace.start.length} and ${w.perTrace.end.length}`);
  }
}

/** q = clamp(log10(ratio) / 2, 0, 1). */
export function qualityFromEnergyRatio(ratio: number): number {
  if (!(ratio > 1)) return 0;
  return Math.min(1, Math.log10(ratio) / 2);
}

/** Mean square of x[base + a … base + b), clipped to the trace. */
function meanSquare(data: Float32Array, base: number, a: number, b: number, n: number): number {
  const lo = Math.max(0, a);
  const hi = Math.min(n, b);
  if (hi <= lo) return 0;
  let s = 0;
  for (let i = lo; i < hi; i++) s += data[base + i] * data[base + i];
  return s / (hi - lo);
}

function pickQuality(data: Float32Array, base: number, pick: number, w: PickSearchWindow, n: number): number {
  const after = meanSquare(data, base, pick, pick + w.shortSamples, n);
  const before = meanSquare(data, base, pick - w.longSamples, pick, n);
  if (before <= 0) return after > 0 ? 1 : 0;
  return qualityFromEnergyRatio(after / before);
}

/**
 * Energy of a sample, relative to the mean square of the noise before it, up to which the onset
 * search walks back (2: 3 dB above the noise; chosen on the demo's synthetic gathers against
 * their true onsets, where it beat 1 and 4).
 */
export const ONSET_NOISE_FACTOR = 2;

/** Where an energy-ratio pick sits: at the first energy rise (onset) or at the ratio's maximum. */
export type PickPosition = "onset" | "ratio-peak";

/**
 * Energy-ratio (STA/LTA) picks, after Allen (1978).
 * @param triggerRatio STA/LTA level that declares an arrival (e.g. 3); traces that never reach it get no pick.
 * @param pickAt "onset" (default) or "ratio-peak"; see the module notes.
 */
export function staLtaPicks(
  data: Float32Array,
  traceCount: number,
  sampleCount: number,
  window: PickSearchWindow,
  triggerRatio: number,
  pickAt: PickPosition = "onset",
): TracePicks {
  assertTraceBlock(data, traceCount, sampleCount);
  checkWindow(window, sampleCount, traceCount);
  assertFinite("triggerRatio", triggerRatio);
  if (!(triggerRatio > 1)) throw new RangeError(`triggerRatio must be above 1, got ${triggerRatio}`);
  if (pickAt !== "onset" && pickAt !== "ratio-peak") throw new RangeError(`pickAt must be "onset" or "ratio-peak", got ${String(pickAt)}`);
  const { shortSamples: ns, longSamples: nl } = window;
  const index = new Float64Array(traceCount).fill(NaN);
  const quality = new Float64Array(traceCount);
  const prefix = new Float64Array(sampleCount + 1);
  for (let t = 0; t < traceCount; t++) {
    const base = t * sampleCount;
    let sumAbs = 0;
    let sumDiff = 0;
    for (let i = 1; i < sampleCount; i++) {
      sumAbs += Math.abs(data[base + i]);
      sumDiff += Math.abs(data[base + i] - data[base + i - 1]);
    }
    const c = sumDiff > 0 ? sumAbs / sumDiff : 0;
    prefix[0] = 0;
    for (let i = 0; i < sampleCount; i++) {
      const x = data[base + i];
      const d = i > 0 ? x - data[base + i - 1] : 0;
      prefix[i + 1] = prefix[i] + x * x + c * d * d;
    }
    const total = prefix[sampleCount];
    if (!(total > 0)) continue;
    const floor = 1e-12 * (total / sampleCount);
    // Ratio at sample i: mean over [i, i + ns) / mean over [i − nl, i). Near the trace start the
    // long window is cut to the samples there are (but at least two short windows, below
    // which the noise estimate fluctuates enough to trigger on noise), so early arrivals on near
    // traces can still be picked.
    const [lo, hi] = traceBounds(window, t);
    const first = Math.max(lo, Math.min(nl, 2 * ns));
    const last = Math.min(hi, sampleCount - ns + 1);
    const ratioAt = (i: number) => {
      const len = Math.min(nl, i);
      return ((prefix[i + ns] - prefix[i]) / ns) / ((prefix[i] - prefix[i - len]) / len + floor);
    };
    let trigger = -1;
    for (let i = first; i < last; i++) {
      if (ratioAt(i) >= triggerRatio) {
        trigger = i;
        break;
      }
    }
    if (trigger < 0) continue;
    let best = trigger;
    let bestRatio = ratioAt(trigger);
    const stop = Math.min(last, trigger + ns + 1);
    for (let i = trigger + 1; i < stop; i++) {
      const r = ratioAt(i);
      if (r > bestRatio) {
        bestRatio = r;
        best = i;
      }
    }
    if (pickAt === "onset") {
      const noiseEnd = best - ns;
      const noiseStart = Math.max(0, best - nl);
      if (noiseEnd - noiseStart >= 2) {
        const noise = meanSquare(data, base, noiseStart, noiseEnd, sampleCount);
        const stop = Math.max(lo, 1, best - 2 * ns);
        let i = best;
        while (i > stop && data[base + i - 1] * data[base + i - 1] > ONSET_NOISE_FACTOR * noise) i--;
        best = i;
      }
    }
    index[t] = best;
    quality[t] = pickQuality(data, base, best, window, sampleCount);
  }
  return { index, quality };
}

/**
 * Information-criterion (AIC) picks after Maeda (1985), evaluated on [searchStart, searchEnd)
 * of each trace (or, when `centres` is given, on ±`halfWidth` samples around centres[t], keeping
 * only picks inside the search window; NaN centres give no pick). Variances come from running sums in Float64.
 */
export function aicPicks(
  data: Float32Array,
  traceCount: number,
  sampleCount: number,
  window: PickSearchWindow,
  around?: { centres: Float64Array; halfWidth: number },
): TracePicks {
  assertTraceBlock(data, traceCount, sampleCount);
  checkWindow(window, sampleCount, traceCount);
  if (around) {
    assertCount("halfWidth", around.halfWidth);
    if (around.centres.length !== traceCount) throw new RangeError(`centres must hold ${traceCount} values, got ${around.centres.length}`);
  }
  const index = new Float64Array(traceCount).fill(NaN);
  const quality = new Float64Array(traceCount);
  const s1 = new Float64Array(sampleCount + 1);
  const s2 = new Float64Array(sampleCount + 1);
  for (let t = 0; t < traceCount; t++) {
    const base = t * sampleCount;
    const [lo, hi] = traceBounds(window, t);
    if (hi <= lo) continue;
    let a = lo;
    let b = hi;
    if (around) {
      // The window around a preliminary pick may reach before the search start: AIC needs
      // noise before the onset to see the change. Only the pick itself must lie in the search window.
      const c = around.centres[t];
      if (!(c === c)) continue;
      a = Math.max(0, Math.round(c) - around.halfWidth);
      b = Math.min(sampleCount, Math.round(c) + around.halfWidth + 1);
    }
    const n = b - a;
    if (n < 6) continue;
    for (let i = 0; i < n; i++) {
      const x = data[base + a + i];
      s1[i + 1] = s1[i] + x;
      s2[i + 1] = s2[i] + x * x;
    }
    const totalVar = s2[n] / n - (s1[n] / n) ** 2;
    if (!(totalVar > 0)) continue;
    const floor = 1e-12 * totalVar;
    let bestK = -1;
    let bestAic = Infinity;
    // Segments x[0 .. k) and x[k .. n) (0-based), each at least 2 samples long.
    for (let k = 2; k <= n - 2; k++) {
      const m1 = s1[k] / k;
      const v1 = s2[k] / k - m1 * m1;
      const m2 = (s1[n] - s1[k]) / (n - k);
      const v2 = (s2[n] - s2[k]) / (n - k) - m2 * m2;
      // Maeda's AIC with k samples before and N − k after (1-based k = our k): k log v1 + (N − k − 1) log v2.
      const aic = k * Math.log(Math.max(v1, 0) + floor) + (n - k - 1) * Math.log(Math.max(v2, 0) + floor);
      if (aic < bestAic) {
        bestAic = aic;
        bestK = k;
      }
    }
    if (bestK < 0) continue;
    const pick = a + bestK;
    if (pick < lo || pick >= hi) continue;
    index[t] = pick;
    quality[t] = pickQuality(data, base, pick, window, sampleCount);
  }
  return { index, quality };
}

function medianInPlace(values: number[]): number {
  values.sort((p, q) => p - q);
  const h = values.length >> 1;
  return values.length % 2 ? values[h] : 0.5 * (values[h - 1] + values[h]);
}

/**
 * Flags picks that break the smooth offset-time trend of a gather. For each pick, a straight
 * line is fitted to up to `neighbours` picked traces on each side of it in |offset| order (same
 * side of the source, the pick itself left out) by the Theil–Sen estimator (median of pairwise
 * slopes, then median intercept; Theil 1950, Sen 1968), which a single bad neighbour cannot
 * drag; the pick is flagged when it lies more than `toleranceS` from that line. A local line
 * follows the bends of a refraction trend and extrapolates correctly at the ends of a spread.
 * Picks with fewer than two such neighbours are not flagged. NaN times mean "no pick".
 */
export function flagOffsetOutliers(
  offsetsM: ArrayLike<number>,
  timesS: ArrayLike<number>,
  neighbours: number,
  toleranceS: number,
): Uint8Array {
  if (offsetsM.length !== timesS.length) throw new RangeError(`offsets (${offsetsM.length}) and times (${timesS.length}) must match`);
  assertCount("neighbours", neighbours);
  assertFinite("toleranceS", toleranceS);
  if (neighbours < 1) throw new RangeError(`neighbours must be at least 1, got ${neighbours}`);
  const flags = new Uint8Array(timesS.length);
  const slopes: number[] = [];
  const intercepts: number[] = [];
  const near: number[] = [];
  for (const side of [-1, 1]) {
    const members: number[] = [];
    for (let i = 0; i < timesS.length; i++) {
      const o = offsetsM[i];
      const onSide = side < 0 ? o < 0 : o >= 0;
      if (onSide && timesS[i] === timesS[i]) members.push(i);
    }
    members.sort((p, q) => Math.abs(offsetsM[p]) - Math.abs(offsetsM[q]));
    for (let m = 0; m < members.length; m++) {
      near.length = 0;
      for (let j = Math.max(0, m - neighbours); j <= Math.min(members.length - 1, m + neighbours); j++) {
        if (j !== m) near.push(members[j]);
      }
      if (near.length < 2) continue;
      slopes.length = 0;
      for (let a = 0; a < near.length; a++) {
        for (let b = a + 1; b < near.length; b++) {
          const dx = Math.abs(offsetsM[near[b]]) - Math.abs(offsetsM[near[a]]);
          if (dx !== 0) slopes.push((timesS[near[b]] - timesS[near[a]]) / dx);
        }
      }
      const slope = slopes.length ? medianInPlace(slopes) : 0;
      intercepts.length = 0;
      for (const j of near) intercepts.push(timesS[j] - slope * Math.abs(offsetsM[j]));
      const predicted = medianInPlace(intercepts) + slope * Math.abs(offsetsM[members[m]]);
      if (Math.abs(timesS[members[m]] - predicted) > toleranceS) flags[members[m]] = 1;
    }
  }
  return flags;
}
