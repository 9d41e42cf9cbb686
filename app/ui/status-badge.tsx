import { STATUS_MEANINGS, statusWord, STOPPING_WORD } from "./status-words";

const STYLES: Record<string, string> = {
  queued: "bg-ground text-ink-soft border-line",
  waiting: "bg-ground text-ink-faint border-line",
  running: "bg-accent-soft text-accent border-accent/30",
  succeeded: "bg-ok-soft text-ok border-ok/30",
  failed: "bg-bad-soft text-bad border-bad/30",
  cancelled: "bg-warn-soft text-warn border-warn/30",
  interrupted: "bg-warn-soft text-warn border-warn/30",
  skipped: "bg-ground text-ink-faint border-line",
};

/**
 * A run or step state as a small labelled badge (text, not colour alone), in the words of
 * app/ui/status-words.ts. `stopping` marks a run asked to stop that has not ended yet.
 */
export function StatusBadge({ status, stopping = false }: { status: string; stopping?: boolean }) {
  const shown = stopping ? "cancelled" : status;
  const meaning = (STATUS_MEANINGS as Record<string, string>)[status];
  return (
    <span
      className={`inline-flex items-center gap-1 rounded-full border px-2 py-0.5 text-xs font-medium ${STYLES[shown] ?? STYLES.queued}`}
      data-status={status}
      title={stopping ? "asked to stop; the step in progress stops at its next check" : meaning}
    >
      {status === "running" && !stopping ? <span className="h-1.5 w-1.5 animate-pulse rounded-full bg-accent" aria-hidden /> : null}
      {stopping ? STOPPING_WORD : statusWord(status)}
    </span>
  );
}
