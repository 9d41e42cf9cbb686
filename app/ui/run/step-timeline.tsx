"use client";

import type { StepView } from "@/app/lib/view-types";
import { formatDuration } from "@/app/ui/format";
import { StatusBadge } from "@/app/ui/status-badge";

/** The steps of a run in order: status, duration, reused or computed; click to open one. */
export function StepTimeline({ steps, selected, onSelect }: { steps: StepView[]; selected: string | null; onSelect: (label: string) => void }) {
  return (
    <ol className="space-y-1" aria-label="Steps" data-testid="step-timeline">
      {steps.map((s, i) => (
        <li key={s.id}>
          <button
            type="button"
            onClick={() => onSelect(s.label)}
            aria-current={selected === s.label ? "step" : undefined}
            data-testid={`step-${s.label}`}
            data-cache-hit={s.cacheHit ? "yes" : "no"}
            className={`group flex w-full items-start gap-3 rounded-md border px-3 py-2 text-left ${selected === s.label ? "border-accent bg-accent-soft" : "border-transparent hover:border-line hover:bg-panel"}`}
          >
            <span className={`mt-0.5 flex h-6 w-6 shrink-0 items-center justify-center rounded-full text-[11px] font-medium ${s.status === "succeeded" ? "bg-ok text-white" : s.status === "failed" ? "bg-bad text-white" : s.status === "running" ? "bg-accent text-white" : "bg-line text-ink-soft"}`}>{i + 1}</span>
            <span className="min-w-0 flex-1">
              <span className="flex items-center justify-between gap-2">
                <span className="truncate font-medium">{s.label}</span>
                <StatusBadge status={s.status} />
              </span>
              <span className="mt-0.5 flex flex-wrap gap-x-2 text-xs muted">
                <span>{s.stepId} v{s.stepVersion}</span>
                <span className="tabular-nums">{formatDuration(s.durationMs)}</span>
                {s.cacheHit ? <span className="rounded bg-ok-soft px-1 text-ok" data-testid="cache-hit">reused{s.cacheSourceRunId ? ` from run ${s.cacheSourceRunId}` : ""}</span> : null}
              </span>
              {s.status === "running" ? (
                <span className="mt-1 block h-1 overflow-hidden rounded bg-line">
                  <span className="block h-full bg-accent transition-all" style={{ width: `${Math.round(s.progress * 100)}%` }} />
                </span>
              ) : null}
              {s.status === "running" && s.progressMessage ? <span className="block text-xs muted">{s.progressMessage}</span> : null}
            </span>
          </button>
        </li>
      ))}
    </ol>
  );
}
