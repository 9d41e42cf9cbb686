/**
 * Hand edits of first-arrival picks (pipeline/kernels/pick-edits.ts). The editing semantics are
 * common practice of interactive picking: a hand pick replaces the automatic pick of its trace,
 * a deletion leaves the trace without a pick, and of several edits of one trace the last decides.
 */
import { describe, expect, it } from "vitest";
import { applyPickEdits, type TracePickEdit } from "../../../pipeline/kernels/pick-edits";
import { seededRandom } from "../../helpers/random";

describe("applyPickEdits", () => {
  it("moves, adds and deletes picks and marks the edited traces; the input stays as it was", () => {
    const auto = Float64Array.from([0.01, 0.012, NaN, 0.016, NaN]);
    const before = Float64Array.from(auto);
    const r = applyPickEdits(auto, [
      { trace: 1, action: "moved", timeS: 0.0135 },
      { trace: 2, action: "added", timeS: 0.0142 },
      { trace: 3, action: "deleted", timeS: NaN },
      // Deleting a trace without a pick changes nothing (but the trace counts as decided by hand).
      { trace: 4, action: "deleted", timeS: NaN },
    ]);
    expect(Array.from(auto)).toEqual(Array.from(before));
    expect(Array.from(r.timesS)).toEqual([0.01, 0.0135, 0.0142, NaN, NaN]);
    expect(Array.from(r.hand)).toEqual([0, 1, 1, 1, 1]);
    expect({ moved: r.moved, added: r.added, deleted: r.deleted, superseded: r.superseded }).toEqual({ moved: 1, added: 1, deleted: 1, superseded: 0 });
  });

  it("lets the last edit of a trace decide, and a move of an unpicked trace adds a pick (common practice)", () => {
    const auto = Float64Array.from([0.02, NaN]);
    const r = applyPickEdits(auto, [
      { trace: 0, action: "deleted", timeS: NaN },
      { trace: 0, action: "added", timeS: 0.021 },
      { trace: 1, action: "moved", timeS: 0.03 },
    ]);
    expect(Array.from(r.timesS)).toEqual([0.021, 0.03]);
    // Trace 0 had an automatic pick, so its final hand pick counts as a move, whatever the edit says.
    expect({ moved: r.moved, added: r.added, deleted: r.deleted, superseded: r.superseded }).toEqual({ moved: 1, added: 1, deleted: 0, superseded: 1 });
  });

  it("gives the same picks for any order of the edits of distinct traces (seeded shuffles)", () => {
    const rnd = seededRandom(1207);
    const n = 48;
    const auto = Float64Array.from({ length: n }, (_, t) => (rnd.uniform() < 0.2 ? NaN : 0.005 + t * 0.001));
    const edits: TracePickEdit[] = [];
    for (let t = 0; t < n; t += 3) {
      const u = rnd.uniform();
      edits.push(u < 0.3 ? { trace: t, action: "deleted", timeS: NaN } : { trace: t, action: u < 0.65 ? "moved" : "added", timeS: 0.004 + 0.05 * rnd.uniform() });
    }
    const reference = applyPickEdits(auto, edits);
    for (let k = 0; k < 5; k++) {
      const shuffled = [...edits];
      for (let i = shuffled.length - 1; i > 0; i--) {
        const j = Math.floor(rnd.uniform() * (i + 1));
        [shuffled[i], shuffled[j]] = [shuffled[j], shuffled[i]];
      }
      const r = applyPickEdits(auto, shuffled);
      expect(Array.from(r.timesS)).toEqual(Array.from(reference.timesS));
      expect(Array.from(r.hand)).toEqual(Array.from(reference.hand));
    }
    expect(reference.moved + reference.added + reference.deleted).toBeLessThanOrEqual(edits.length);
    expect(reference.hand.reduce((s, v) => s + v, 0)).toBe(edits.length);
  });

  it("refuses a trace outside the gather, an unknown action and a move without a time, naming the edit", () => {
    const auto = new Float64Array(4);
    expect(() => applyPickEdits(auto, [{ trace: 0, action: "moved", timeS: 0.01 }, { trace: 4, action: "moved", timeS: 0.01 }])).toThrow(/edits\[1\]\.trace must be an integer from 0 to 3, got 4/);
    expect(() => applyPickEdits(auto, [{ trace: 1.5, action: "deleted", timeS: NaN }])).toThrow(RangeError);
    expect(() => applyPickEdits(auto, [{ trace: 0, action: "shifted" as never, timeS: 0.01 }])).toThrow(/edits\[0\]\.action must be one of moved, deleted, added/);
    expect(() => applyPickEdits(auto, [{ trace: 2, action: "added", timeS: NaN }])).toThrow(/edits\[0\]\.timeS must be a finite time for a "added" edit/);
  });
});
