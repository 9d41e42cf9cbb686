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

const LABELS: Record<string, string> = {
  queued: "Queued",
  waiting: "Waiting",
  running: "Running",
  succeeded: "Done",
  failed: "Failed",
  cancelled: "Stopped",
  interrupted: "Interrupted",
  skipped: "Skipped",
};

/** A run or step status as a small labelled badge (text, not colour alone). */
export function StatusBadge({ status }: { status: string }) {
  return (
    <span className={`inline-flex items-center gap-1 rounded-full border px-2 py-0.5 text-xs font-medium ${STYLES[status] ?? STYLES.queued}`} data-status={status}>
      {status === "running" ? <span className="h-1.5 w-1.5 animate-pulse rounded-full bg-accent" aria-hidden /> : null}
      {LABELS[status] ?? status}
    </span>
  );
}
