/**
 * The editor's side of hand picks of dispersion curves: points [frequency Hz, phase velocity
 * m/s] per window and mode, kept sorted by frequency with one velocity per frequency (a mode's
 * dispersion curve is single-valued in frequency: common practice). Pure functions; the
 * dispersion-image step holds the result in its `handPicks` setting.
 */

export type CurvePoint = [number, number];

/** One entry of the dispersion-image step's `handPicks` setting. */
export interface HandPickEntry {
  window: string;
  mode: number;
  points: CurvePoint[];
}

/**
 * `p` put into the curve: points closer in frequency than `minSpacingHz` / 2 to it are replaced
 * (one velocity per frequency), the rest kept, sorted by frequency. `except` leaves one index out
 * (the point being moved).
 */
function place(points: readonly CurvePoint[], p: CurvePoint, minSpacingHz: number, except = -1): CurvePoint[] {
  if (!(Number.isFinite(p[0]) && Number.isFinite(p[1]) && p[0] > 0 && p[1] > 0)) {
    throw new RangeError(`a point needs a positive frequency and velocity, got [${p[0]}, ${p[1]}]`);
  }
  if (!(minSpacingHz >= 0)) throw new RangeError(`minSpacingHz must be 0 or more, got ${minSpacingHz}`);
  const kept = points.filter((q, i) => i !== except && Math.abs(q[0] - p[0]) >= minSpacingHz / 2);
  return [...kept, p].sort((a, b) => a[0] - b[0]);
}

/** The curve with a point added (replacing any point at nearly the same frequency). */
export function addPoint(points: readonly CurvePoint[], p: CurvePoint, minSpacingHz: number): CurvePoint[] {
  return place(points, p, minSpacingHz);
}

/** The curve with point `index` moved to `p` (a point it lands on is replaced). */
export function movePoint(points: readonly CurvePoint[], index: number, p: CurvePoint, minSpacingHz: number): CurvePoint[] {
  if (!Number.isInteger(index) || index < 0 || index >= points.length) throw new RangeError(`index must be 0 to ${points.length - 1}, got ${index}`);
  return place(points, p, minSpacingHz, index);
}

/** The curve without point `index`. */
export function deletePoint(points: readonly CurvePoint[], index: number): CurvePoint[] {
  if (!Number.isInteger(index) || index < 0 || index >= points.length) throw new RangeError(`index must be 0 to ${points.length - 1}, got ${index}`);
  return points.filter((_, i) => i !== index);
}

/** The points of one window and mode (empty when there is no such entry). */
export function curveOf(handPicks: readonly HandPickEntry[], window: string, mode: number): CurvePoint[] {
  return handPicks.find((h) => h.window === window && h.mode === mode)?.points ?? [];
}

/**
 * The setting with the curve of one window and mode replaced; an empty curve removes the entry
 * (the setting needs at least one point per entry). Entries stay sorted by window, then mode.
 */
export function withCurve(handPicks: readonly HandPickEntry[], window: string, mode: number, points: readonly CurvePoint[]): HandPickEntry[] {
  const rest = handPicks.filter((h) => !(h.window === window && h.mode === mode));
  const out = points.length > 0 ? [...rest, { window, mode, points: [...points] }] : rest;
  return out.sort((a, b) => (a.window === b.window ? a.mode - b.mode : a.window < b.window ? -1 : 1));
}

/**
 * A curve of at most `maxPoints` points taken evenly from another (e.g. the automatic pick, as a
 * start for a hand pick), first and last kept.
 */
export function thinCurve(points: readonly CurvePoint[], maxPoints: number): CurvePoint[] {
  if (!Number.isInteger(maxPoints) || maxPoints < 2) throw new RangeError(`maxPoints must be an integer of at least 2, got ${maxPoints}`);
  if (points.length <= maxPoints) return points.map((p) => [p[0], p[1]]);
  const out: CurvePoint[] = [];
  for (let k = 0; k < maxPoints; k++) {
    const p = points[Math.round((k * (points.length - 1)) / (maxPoints - 1))];
    out.push([p[0], p[1]]);
  }
  return out;
}
