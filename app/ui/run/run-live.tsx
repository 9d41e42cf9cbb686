"use client";

import Link from "next/link";
import { useState } from "react";
import { useQuery, useQueryClient } from "@tanstack/react-query";
import { ApiError, postJson, runQueries } from "@/app/lib/queries";
import type { RunView } from "@/app/lib/view-types";
import { DOOR_LABELS, formatDuration, formatTime } from "@/app/ui/format";
import { InversionViews } from "@/app/ui/inversion/inversion-view";
import { StatusBadge } from "@/app/ui/status-badge";
import { STOPPING_WORD } from "@/app/ui/status-words";
import { Provenance } from "./provenance";
import { ReproductionPanel } from "./reproduction-panel";
import { ReviewPanel } from "./review-panel";
import { RunResults } from "./run-results";
import { StepPanel } from "./step-panel";
import { StepTimeline } from "./step-timeline";

/** The run page's live part: header, step timeline, the chosen step, provenance, review and results. */
export function RunLive({
  initial,
  initialStep,
  can,
  paramDocs = {},
}: {
  initial: RunView;
  initialStep?: string;
  can: { rerun: boolean; cancel: boolean; review: boolean; auditExport?: boolean; reproduce?: boolean };
  /** Settings documentation by step id (readable labels and units). */
  paramDocs?: Record<string, Array<{ name: string; description: string }>>;
}) {
  const client = useQueryClient();
  const { data } = useQuery(runQueries.detail(initial.id, initial));
  const run = data ?? initial;
  const live = run.status === "queued" || run.status === "running";
  const defaultStep = run.steps.find((s) => s.status === "running")?.label ?? run.steps.at(-1)?.label ?? null;
  const [selected, setSelected] = useState<string | null>(initialStep ?? null);
  const step = run.steps.find((s) => s.label === (selected ?? defaultStep)) ?? null;
  const [cancelError, setCancelError] = useState<string | null>(null);
  // Asked to stop: once no step is running any more the stop has happened, even while the
  // run's process is still closing down and the run row says "running".
  const stopping = live && run.cancelRequested;
  const stopped = stopping && !run.steps.some((s) => s.status === "running");

  async function cancel() {
    try {
      await postJson(`/api/runs/${run.id}/cancel`, {});
      await client.invalidateQueries({ queryKey: ["run", run.id] });
    } catch (err) {
      setCancelError(err instanceof ApiError ? err.message : String(err));
    }
  }

  return (
    <div className="space-y-6">
      <header className="flex flex-wrap items-start justify-between gap-4">
        <div>
          <p className="text-xs muted"><Link href="/runs" className="hover:underline">Runs</Link> /</p>
          <h1 className="flex items-center gap-3">Run {run.id} {stopped ? <StatusBadge status="cancelled" /> : <StatusBadge status={run.status} stopping={stopping} />}</h1>
          <p className="text-ink-soft">
            {run.pipelineName} v{run.pipelineVersion} on {run.datasetName} · started by {run.startedBy} via the {DOOR_LABELS[run.door]} · {formatTime(run.startedAt ?? run.createdAt)} · {formatDuration(run.durationMs)}
          </p>
          <p className="text-xs muted" data-testid="run-step-counts">
            {run.stepsDone} of {run.stepsTotal} steps done{run.cacheHits ? `, ${run.cacheHits} reused from earlier runs` : ""}
          </p>
          {run.error ? <p role="alert" className="mt-2 rounded-md bg-bad-soft px-3 py-2 text-sm text-bad">{run.error}</p> : null}
        </div>
        <div className="flex gap-2">
          {run.parentRunId ? <Link className="btn" href={`/compare?a=${run.parentRunId}&b=${run.id}`}>Compare with run {run.parentRunId}</Link> : null}
          {can.cancel && live ? <button type="button" className="btn" onClick={cancel} disabled={run.cancelRequested}>{run.cancelRequested ? STOPPING_WORD : "Stop run"}</button> : null}
        </div>
      </header>
      {cancelError ? <p role="alert" className="text-sm text-bad">{cancelError}</p> : null}

      <div className="grid gap-6 xl:grid-cols-[300px_1fr_320px] lg:grid-cols-[280px_1fr]">
        <aside>
          <h2 className="mb-2 text-sm">Steps</h2>
          <StepTimeline steps={run.steps} selected={step?.label ?? null} onSelect={setSelected} />
        </aside>
        <div className="min-w-0">
          {step ? <StepPanel run={run} step={step} canRerun={can.rerun} live={live} docs={paramDocs[step.stepId] ?? []} /> : <p className="muted">This run has no steps.</p>}
        </div>
        <div className="space-y-4 lg:col-span-2 xl:col-span-1">
          <ReviewPanel run={run} canReview={can.review} />
          <Provenance run={run} canExportAudit={can.auditExport ?? false} />
          <ReproductionPanel run={run} canReproduce={can.reproduce ?? false} />
        </div>
      </div>

      <InversionViews run={run} live={live} />

      <RunResults run={run} />
    </div>
  );
}
