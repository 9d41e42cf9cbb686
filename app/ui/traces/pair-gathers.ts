/**
 * Choosing the gather of a second source (or of a newly chosen source) that matches a wanted
 * gather: the same id, else the gather at the same source position (e.g. sp14 after the
 * vertical stack for sp14-b3 before it), else the gather whose source is nearest, else the
 * first. A wanted id that a source does not hold is never requested from the server.
 */

export interface GatherEntry {
  id: string;
  /** Source position of the gather, m (absent in older outlines). */
  sourceX?: number;
}

export type PairReason = "same id" | "same source position" | "nearest source position" | "first gather" | "none";

/** Same position within this many metres. */
export const SAME_POSITION_M = 0.01;

export function pairGather(list: GatherEntry[], wanted: { id?: string; sourceX?: number } | null): { id: string; reason: PairReason } {
  if (list.length === 0) return { id: "", reason: "none" };
  if (wanted?.id && list.some((g) => g.id === wanted.id)) return { id: wanted.id, reason: "same id" };
  const x = wanted?.sourceX;
  if (x !== undefined && Number.isFinite(x)) {
    let best: GatherEntry | null = null;
    let bestD = Infinity;
    for (const g of list) {
      if (g.sourceX === undefined || !Number.isFinite(g.sourceX)) continue;
      const d = Math.abs(g.sourceX - x);
      if (d < bestD) {
        best = g;
        bestD = d;
      }
    }
    if (best) return { id: best.id, reason: bestD <= SAME_POSITION_M ? "same source position" : "nearest source position" };
  }
  return { id: list[0].id, reason: "first gather" };
}
