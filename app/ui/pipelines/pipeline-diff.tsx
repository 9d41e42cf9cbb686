import type { PipelineDifference, ValueChange } from "@/pipeline/pipeline-edit";
import { formatReadable, readableName } from "@/app/ui/format";

const STATUS_WORDS = { added: "added", removed: "removed", changed: "changed", same: "unchanged" } as const;
const STATUS_STYLE = { added: "bg-ok-soft text-ok", removed: "bg-bad-soft text-bad", changed: "bg-warn-soft text-warn", same: "text-ink-faint" } as const;

function valueText(c: ValueChange, which: "before" | "after"): string {
  const v = c[which];
  if (v === undefined) return "(unset)";
  const last = c.path.split(/[.[\]]/).filter(Boolean).pop() ?? "";
  return formatReadable(v, readableName(last).unit);
}

function Changes({ changes, prefix }: { changes: ValueChange[]; prefix: string }) {
  return (
    <ul className="mt-1 space-y-0.5 text-sm">
      {changes.map((c) => (
        <li key={c.path} data-testid={`diff-change-${prefix}${c.path}`} className="font-mono text-xs">
          <span className="text-ink">{c.path}</span>: <span className="text-bad line-through decoration-1">{valueText(c, "before")}</span> → <span className="text-accent">{valueText(c, "after")}</span>
        </li>
      ))}
    </ul>
  );
}

/** The differences between two pipeline versions: steps added, removed, moved; settings before → after. */
export function PipelineDiffView({ diff, fromVersion, toVersion }: { diff: PipelineDifference; fromVersion: number; toVersion: number }) {
  const touched = diff.steps.filter((s) => s.status !== "same" || s.moved);
  return (
    <div className="space-y-3" data-testid="pipeline-diff">
      <p className="text-sm text-ink-soft">
        From v{fromVersion} to v{toVersion}: {touched.length === 0 && diff.pipeline.length === 0 ? "no differences." : `${touched.length} step${touched.length === 1 ? "" : "s"} differ${touched.length === 1 ? "s" : ""}${diff.pipeline.length ? `, and ${diff.pipeline.length} pipeline field${diff.pipeline.length === 1 ? "" : "s"}` : ""}.`}
      </p>
      {diff.pipeline.length ? <Changes changes={diff.pipeline} prefix="" /> : null}
      <ol className="space-y-1">
        {diff.steps.map((s) => (
          <li key={`${s.status}-${s.label}`} className={`rounded-md border border-line px-3 py-2 ${s.status === "same" && !s.moved ? "opacity-70" : ""}`} data-testid={`diff-step-${s.label}`} data-status={s.status} data-moved={s.moved ? "yes" : "no"}>
            <div className="flex flex-wrap items-center gap-2 text-sm">
              <span className="w-14 text-xs muted">{s.positionBefore ?? "—"} → {s.positionAfter ?? "—"}</span>
              <span className="font-semibold">{s.label}</span>
              <span className="muted">({s.stepId})</span>
              <span className={`rounded px-1.5 text-xs ${STATUS_STYLE[s.status]}`}>{STATUS_WORDS[s.status]}</span>
              {s.moved ? <span className="rounded bg-accent-soft px-1.5 text-xs text-accent">moved from {s.positionBefore} to {s.positionAfter}</span> : null}
            </div>
            {s.changes.length ? <Changes changes={s.changes} prefix={`${s.label}.`} /> : null}
          </li>
        ))}
      </ol>
    </div>
  );
}
