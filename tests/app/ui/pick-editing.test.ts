/**
 * The control room's pick editors: the pending list of first-arrival edits and its merge with the
 * saved setting, the dispersion-curve point edits, and the click → (trace, time) mapping of the
 * trace canvas. The editing semantics are common practice of interactive picking (a hand pick
 * replaces the trace's pick; the last edit of a trace decides; a dispersion curve of one mode has
 * one velocity per frequency).
 */
import { describe, expect, it } from "vitest";
import { clickEdit, mergePickEdits, picksWithPending, withPendingEdit, type PickEditEntry } from "../../../app/ui/picks/pick-edit-list";
import { addPoint, deletePoint, movePoint, thinCurve, withCurve, type CurvePoint } from "../../../app/ui/picks/dispersion-points";
import { fullWindow, MARGIN, pointAt, type GatherView } from "../../../app/ui/traces/draw-traces";
import { applyPickEdits } from "../../../pipeline/kernels/pick-edits";
import { seededRandom } from "../../helpers/random";

describe("first-arrival pick edits in the editor", () => {
  it("keeps one pending edit per trace and lets a click move a picked trace, add to an unpicked one", () => {
    let pending: PickEditEntry[] = [];
    pending = withPendingEdit(pending, clickEdit("sp01", 5, 12.3456789, true));
    pending = withPendingEdit(pending, clickEdit("sp01", 7, 20, false));
    pending = withPendingEdit(pending, { gather: "sp01", channel: 5, action: "deleted", timeMs: null });
    expect(pending).toEqual([
      { gather: "sp01", channel: 7, action: "added", timeMs: 20 },
      { gather: "sp01", channel: 5, action: "deleted", timeMs: null },
    ]);
    expect(clickEdit("sp02", 1, 12.3456789, true).timeMs).toBe(12.346);
  });

  it("merges with the saved edits to the same picks as appending them (the step's last-edit-wins rule)", () => {
    const rnd = seededRandom(3101);
    const channels = Array.from({ length: 24 }, (_, i) => i + 1);
    const auto = Float64Array.from(channels, () => (rnd.uniform() < 0.25 ? NaN : 0.01 + 0.03 * rnd.uniform()));
    const randomEdits = (count: number): PickEditEntry[] =>
      Array.from({ length: count }, () => {
        const channel = 1 + Math.floor(rnd.uniform() * 24);
        const u = rnd.uniform();
        return u < 0.3 ? { gather: "sp01", channel, action: "deleted" as const, timeMs: null } : { gather: "sp01", channel, action: u < 0.6 ? ("moved" as const) : ("added" as const), timeMs: 5 + 40 * rnd.uniform() };
      });
    const toTrace = (list: PickEditEntry[]) => list.map((e) => ({ trace: e.channel - 1, action: e.action, timeS: e.timeMs === null ? NaN : e.timeMs / 1000 }));
    for (let k = 0; k < 5; k++) {
      // A saved setting made by an earlier save: one entry per trace.
      const saved = mergePickEdits([], randomEdits(8).reduce<PickEditEntry[]>((list, e) => withPendingEdit(list, e), []));
      const pending = randomEdits(8).reduce<PickEditEntry[]>((list, e) => withPendingEdit(list, e), []);
      const merged = mergePickEdits(saved, pending);
      const appended = applyPickEdits(auto, toTrace([...saved, ...pending]));
      const viaMerge = applyPickEdits(auto, toTrace(merged));
      expect(Array.from(viaMerge.timesS)).toEqual(Array.from(appended.timesS));
      // One entry per trace in the merged setting.
      expect(new Set(merged.map((e) => e.channel)).size).toBe(merged.length);
    }
  });

  it("draws pending edits over the artifact's picks", () => {
    const picks = [
      { traceIndex: 0, timeS: 0.01, flagged: false },
      { traceIndex: 1, timeS: 0.02, flagged: true },
      { traceIndex: 2, timeS: 0.03, flagged: false, hand: true },
    ];
    const shown = picksWithPending(picks, [11, 12, 13, 14], "sp03", [
      { gather: "sp03", channel: 12, action: "moved", timeMs: 25 },
      { gather: "sp03", channel: 13, action: "deleted", timeMs: null },
      { gather: "sp03", channel: 14, action: "added", timeMs: 40 },
      { gather: "sp04", channel: 11, action: "deleted", timeMs: null },
    ]);
    expect(shown).toEqual([
      { traceIndex: 0, timeS: 0.01, flagged: false },
      { traceIndex: 1, timeS: 0.025, flagged: false, hand: true, pending: true },
      { traceIndex: 3, timeS: 0.04, flagged: false, hand: true, pending: true },
    ]);
  });
});

describe("dispersion hand picks in the editor", () => {
  it("adds, moves and deletes points with one velocity per frequency, sorted by frequency", () => {
    let c: CurvePoint[] = [];
    c = addPoint(c, [20, 180], 0.5);
    c = addPoint(c, [10, 260], 0.5);
    c = addPoint(c, [30, 150], 0.5);
    expect(c).toEqual([[10, 260], [20, 180], [30, 150]]);
    // A point within half a frequency step of another replaces it.
    c = addPoint(c, [20.2, 190], 0.5);
    expect(c).toEqual([[10, 260], [20.2, 190], [30, 150]]);
    // Dragging a point past its neighbour re-sorts the curve; landing on one replaces it.
    expect(movePoint(c, 0, [25, 170], 0.5)).toEqual([[20.2, 190], [25, 170], [30, 150]]);
    expect(movePoint(c, 0, [30.1, 155], 0.5)).toEqual([[20.2, 190], [30.1, 155]]);
    expect(deletePoint(c, 1)).toEqual([[10, 260], [30, 150]]);
    expect(() => movePoint(c, 3, [5, 5], 0.5)).toThrow(/index must be 0 to 2, got 3/);
    expect(() => addPoint(c, [-1, 100], 0.5)).toThrow(RangeError);
  });

  it("replaces one window and mode in the setting and drops emptied curves", () => {
    let h = withCurve([], "W02", 0, [[10, 250]]);
    h = withCurve(h, "W01", 1, [[30, 400]]);
    h = withCurve(h, "W01", 0, [[12, 240], [20, 190]]);
    expect(h.map((x) => `${x.window}/${x.mode}`)).toEqual(["W01/0", "W01/1", "W02/0"]);
    h = withCurve(h, "W01", 1, []);
    expect(h.map((x) => `${x.window}/${x.mode}`)).toEqual(["W01/0", "W02/0"]);
  });

  it("thins a curve evenly, keeping both ends", () => {
    const pts: CurvePoint[] = Array.from({ length: 101 }, (_, i) => [10 + i * 0.5, 300 - i]);
    const thin = thinCurve(pts, 11);
    expect(thin).toHaveLength(11);
    expect(thin[0]).toEqual([10, 300]);
    expect(thin[10]).toEqual([60, 200]);
    expect(thin[5]).toEqual([35, 250]);
  });
});

describe("trace canvas: the trace and time under a click", () => {
  it("inverts the drawing's mapping for even and offset spacing", () => {
    const g: GatherView = { data: new Float32Array(24 * 100), traces: 24, samples: 100, dtS: 0.001, t0S: -0.01, offsetsM: Array.from({ length: 24 }, (_, i) => 1 + 2 * i) };
    const size = { width: 58 + 14 + 480, height: 38 + 12 + 198 };
    for (const spacing of ["even", "offset"] as const) {
      const settings = { mode: "wiggle" as const, gain: 1, clip: 1, scaling: "trace" as const, spacing };
      const view = fullWindow(g, settings);
      const pw = size.width - MARGIN.left - MARGIN.right;
      const ph = size.height - MARGIN.top - MARGIN.bottom;
      // Trace 7 at time 0.04 s, drawn where the drawing puts it.
      const pos = spacing === "even" ? 7 : g.offsetsM[7];
      const x = MARGIN.left + ((pos - view.xMin) / (view.xMax - view.xMin)) * pw;
      const y = MARGIN.top + ((0.04 - view.tMinS) / (view.tMaxS - view.tMinS)) * ph;
      const hit = pointAt(g, settings, view, size, x + 3, y);
      expect(hit?.traceIndex).toBe(7);
      expect(hit?.timeS).toBeCloseTo(0.04, 12);
      expect(pointAt(g, settings, view, size, MARGIN.left - 5, y)).toBeNull();
    }
  });
});
