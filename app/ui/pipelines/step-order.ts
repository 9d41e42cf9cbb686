/**
 * Reordering the editor's steps: where a step dropped on another one goes. Pure, so the drag
 * (dnd-kit) and the Up/Down buttons share one rule and it is tested without a browser.
 */
import { moveItem } from "@/app/ui/rerun/object-list";

/**
 * The rows after dragging the row `activeId` onto the row `overId` (ids as `idOf` gives them): it
 * takes that row's place and the rows between shift by one towards where it came from (dnd-kit's
 * sortable list semantics, `arrayMove`). Unchanged (the same array) when either id is unknown or
 * both are the same.
 */
export function reorderByDrop<T>(rows: readonly T[], activeId: string | number, overId: string | number | null | undefined, idOf: (row: T) => string | number): readonly T[] {
  if (overId === null || overId === undefined || String(activeId) === String(overId)) return rows;
  const from = rows.findIndex((r) => String(idOf(r)) === String(activeId));
  const to = rows.findIndex((r) => String(idOf(r)) === String(overId));
  if (from < 0 || to < 0) return rows;
  return moveItem(rows, from, to);
}

/** The 0-based indices of the steps that field errors name (`steps[3].settings.x` → 3), ascending and distinct. */
export function stepsWithErrors(fields: Record<string, string>): number[] {
  const out = new Set<number>();
  for (const k of Object.keys(fields)) {
    const m = /^steps\[(\d+)\]/.exec(k);
    if (m) out.add(Number(m[1]));
  }
  return [...out].sort((a, b) => a - b);
}
