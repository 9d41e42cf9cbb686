/**
 * The editor's side of hand edits of first-arrival picks: the pending list, what a click or a
 * deletion adds to it, how it merges with the edits the step already holds, and the picks to
 * draw with the pending edits over them. Pure functions; the step applies the saved list
 * (pipeline/kernels/pick-edits.ts: the last edit of a trace decides).
 */

/** One entry of the first-arrivals step's `pickEdits` setting. */
export interface PickEditEntry {
  gather: string;
  channel: number;
  action: "moved" | "deleted" | "added";
  /** New pick time, ms after the source; null for "deleted". */
  timeMs: number | null;
}

/** A pick as the editor draws it. */
export interface EditorPick {
  traceIndex: number;
  timeS: number;
  flagged: boolean;
  hand?: boolean;
  pending?: boolean;
}

const sameTrace = (a: { gather: string; channel: number }, b: { gather: string; channel: number }) => a.gather === b.gather && a.channel === b.channel;

/** Times in ms kept to the microsecond: finer than any sample interval of the trade, shorter to read. */
export function roundMs(timeMs: number): number {
  return Math.round(timeMs * 1000) / 1000;
}

/** The edit a click at `timeMs` on a trace makes: a move when the trace shows a pick, else an addition. */
export function clickEdit(gather: string, channel: number, timeMs: number, tracePicked: boolean): PickEditEntry {
  return { gather, channel, action: tracePicked ? "moved" : "added", timeMs: roundMs(timeMs) };
}

/** The pending list with `edit` in place of any earlier pending edit of the same trace (one line per trace). */
export function withPendingEdit(pending: readonly PickEditEntry[], edit: PickEditEntry): PickEditEntry[] {
  return [...pending.filter((e) => !sameTrace(e, edit)), edit];
}

/**
 * The setting to save: the edits already saved, less those of traces edited again, then the
 * pending ones. The step would give the same picks for the plain concatenation (the last edit of
 * a trace decides); dropping the overruled ones keeps the setting, and the audit, readable.
 */
export function mergePickEdits(saved: readonly PickEditEntry[], pending: readonly PickEditEntry[]): PickEditEntry[] {
  return [...saved.filter((s) => !pending.some((p) => sameTrace(p, s))), ...pending];
}

/**
 * The picks of one gather with the pending edits over them: a pending move or addition replaces
 * the trace's pick (marked pending), a pending deletion removes it. `channels[i]` is the channel
 * of trace i.
 */
export function picksWithPending(picks: readonly EditorPick[], channels: readonly number[], gather: string, pending: readonly PickEditEntry[]): EditorPick[] {
  const byTrace = new Map<number, PickEditEntry>();
  for (const e of pending) {
    if (e.gather !== gather) continue;
    const t = channels.indexOf(e.channel);
    if (t >= 0) byTrace.set(t, e);
  }
  const out: EditorPick[] = picks.filter((p) => !byTrace.has(p.traceIndex));
  for (const [t, e] of byTrace) {
    if (e.action !== "deleted" && e.timeMs !== null) out.push({ traceIndex: t, timeS: e.timeMs / 1000, flagged: false, hand: true, pending: true });
  }
  return out.sort((a, b) => a.traceIndex - b.traceIndex);
}
