/**
 * Where a dragged step lands in the editor: checked against dnd-kit's own `arrayMove`
 * (@dnd-kit/sortable, the library whose sortable-list semantics the editor follows) for every
 * pair of positions in a list of seven.
 */
import { arrayMove } from "@dnd-kit/sortable";
import { describe, expect, it } from "vitest";
import { reorderByDrop, stepsWithErrors } from "../../../app/ui/pipelines/step-order";

const rows = ["import-records", "geometry", "vertical-stack", "time-window", "frequency-filter", "spectra", "gain"].map((label, key) => ({ key, label }));
const idOf = (r: { key: number }) => `step-${r.key}`;

describe("reorderByDrop", () => {
  it("moves a step to the place of the step it is dropped on, as arrayMove does, for every pair", () => {
    for (let from = 0; from < rows.length; from++) {
      for (let to = 0; to < rows.length; to++) {
        const got = reorderByDrop(rows, idOf(rows[from]), idOf(rows[to]), idOf).map((r) => r.label);
        expect(got, `${from} → ${to}`).toEqual(arrayMove(rows, from, to).map((r) => r.label));
      }
    }
  });

  it("leaves the list alone when dropped outside it, on itself, or on an unknown id", () => {
    expect(reorderByDrop(rows, "step-2", null, idOf)).toBe(rows);
    expect(reorderByDrop(rows, "step-2", undefined, idOf)).toBe(rows);
    expect(reorderByDrop(rows, "step-2", "step-2", idOf)).toBe(rows);
    expect(reorderByDrop(rows, "step-2", "step-99", idOf)).toBe(rows);
  });

  it("takes key 0 like any other (a falsy id is no reason to refuse)", () => {
    expect(reorderByDrop(rows, "step-0", "step-6", idOf).map((r) => r.key)).toEqual([1, 2, 3, 4, 5, 6, 0]);
  });
});

describe("stepsWithErrors", () => {
  it("lists each step a field error names, once, in order", () => {
    expect(stepsWithErrors({ "steps[4].settings.lowCutHz": "x", "steps[1].label": "y", "steps[4].settings.order": "z", description: "w", "steps[12].step": "v" })).toEqual([1, 4, 12]);
  });
});
