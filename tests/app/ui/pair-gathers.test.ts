/**
 * Pairing a gather across sources (before and after the vertical stack): same id, else same
 * source position, else nearest; never an id the source does not hold. Expected pairs worked by
 * hand from the demo's naming (one gather per blow "sp14-b3" before the stack, "sp14" after).
 */
import { describe, expect, it } from "vitest";
import { pairGather } from "@/app/ui/traces/pair-gathers";

const stacked = [
  { id: "sp01", sourceX: -1 },
  { id: "sp02", sourceX: 1 },
  { id: "sp14", sourceX: 25 },
  { id: "sp26", sourceX: 49 },
];

describe("pairGather", () => {
  it("keeps the same id when the source holds it", () => {
    expect(pairGather(stacked, { id: "sp14", sourceX: 25 })).toEqual({ id: "sp14", reason: "same id" });
  });
  it("pairs a blow with the stacked gather at its source position, not the first gather", () => {
    expect(pairGather(stacked, { id: "sp14-b3", sourceX: 25 })).toEqual({ id: "sp14", reason: "same source position" });
  });
  it("falls back to the nearest source position, then to the first gather", () => {
    expect(pairGather(stacked, { id: "x", sourceX: 24.2 })).toEqual({ id: "sp14", reason: "nearest source position" });
    expect(pairGather(stacked, { id: "sp14-b3" })).toEqual({ id: "sp01", reason: "first gather" });
    expect(pairGather([], { id: "sp14" })).toEqual({ id: "", reason: "none" });
  });
  it("never answers an id the list does not hold", () => {
    for (const wanted of [{ id: "sp14-b3", sourceX: 25 }, { id: "zz" }, null]) {
      const { id } = pairGather(stacked, wanted);
      expect(stacked.map((g) => g.id)).toContain(id);
    }
  });
});
