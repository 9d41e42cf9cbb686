/**
 * Hand edits of first-arrival picks, applied after the automatic picker.
 *
 * Layout: the picks of one gather as times per trace, `Float64Array` of length traces, s after
 * the source instant, NaN where a trace has no pick.
 *
 * Editing semantics (common practice of interactive picking, where the processor's pick stands
 * over the automatic one): an edit names a trace and an action. "moved" and "added" set the
 * trace's pick to the edit's time (a move of a trace the picker left without a pick adds one);
 * "deleted" removes the trace's pick. Edits apply in list order, so when several edits name one
 * trace the last one decides; the result therefore depends only on the last edit per trace and
 * is the same for any run of the same settings. Every trace named by an edit is marked as edited
 * by hand, including deleted ones (so a later step can tell "deleted by hand" from "never picked").
 */

/** What an edit does to a trace's pick. */
export type PickEditAction = "moved" | "deleted" | "added";

export const PICK_EDIT_ACTIONS: readonly PickEditAction[] = ["moved", "deleted", "added"];

/** One edit resolved to a trace of the gather. */
export interface TracePickEdit {
  /** Trace index within the gather (row of the `[trace][sample]` layout). */
  trace: number;
  action: PickEditAction;
  /** New pick time, s; ignored for "deleted". */
  timeS: number;
}

/** The picks after the edits, and what the edits did. */
export interface AppliedPickEdits {
  /** Pick time per trace, s, NaN without a pick. */
  timesS: Float64Array;
  /** 1 where the trace's pick (or its absence) comes from an edit, else 0. */
  hand: Uint8Array;
  /** Traces whose automatic pick was replaced by a hand pick at another time (or the same). */
  moved: number;
  /** Traces without an automatic pick that got a hand pick. */
  added: number;
  /** Traces whose automatic pick was deleted (a deletion of a trace without a pick changes nothing and is not counted). */
  deleted: number;
  /** Edits overruled by a later edit of the same trace. */
  superseded: number;
}

/**
 * Applies hand edits to one gather's automatic picks. The input is not mutated.
 *
 * @param automaticS automatic pick time per trace, s (NaN: no pick)
 * @param edits edits in the order they were made
 * @throws RangeError when an edit names a trace outside the gather, an unknown action, or a
 *   "moved"/"added" edit has no finite time; the message names the edit's index.
 */
export function applyPickEdits(automaticS: Float64Array, edits: readonly TracePickEdit[]): AppliedPickEdits {
  const n = automaticS.length;
  // The last edit of each trace decides; earlier ones are superseded.
  const last = new Int32Array(n).fill(-1);
  let superseded = 0;
  edits.forEach((e, i) => {
    if (!Number.isInteger(e.trace) || e.trace < 0 || e.trace >= n) {
      throw new RangeError(`edits[${i}].trace must be an integer from 0 to ${n - 1}, got ${e.trace}`);
    }
    if (!PICK_EDIT_ACTIONS.includes(e.action)) {
      throw new RangeError(`edits[${i}].action must be one of ${PICK_EDIT_ACTIONS.join(", ")}, got ${String(e.action)}`);
    }
    if (e.action !== "deleted" && !Number.isFinite(e.timeS)) {
      throw new RangeError(`edits[${i}].timeS must be a finite time for a "${e.action}" edit, got ${e.timeS}`);
    }
    if (last[e.trace] >= 0) superseded++;
    last[e.trace] = i;
  });
  const timesS = Float64Array.from(automaticS);
  const hand = new Uint8Array(n);
  let moved = 0;
  let added = 0;
  let deleted = 0;
  for (let t = 0; t < n; t++) {
    const i = last[t];
    if (i < 0) continue;
    const e = edits[i];
    const hadPick = automaticS[t] === automaticS[t];
    hand[t] = 1;
    if (e.action === "deleted") {
      if (hadPick) deleted++;
      timesS[t] = NaN;
    } else {
      if (hadPick) moved++;
      else added++;
      timesS[t] = e.timeS;
    }
  }
  return { timesS, hand, moved, added, deleted, superseded };
}
