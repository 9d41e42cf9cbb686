"use client";

import Link from "next/link";
import type { RunView, StepView } from "@/app/lib/view-types";
import { formatDuration, formatReadable, formatSettingValue, formatTime, readableName, shortHash, unitOfDescription } from "@/app/ui/format";
import { formatOfSlot, stepDownloadHref } from "@/app/lib/downloads";
import { StepSeriesChart } from "@/app/ui/charts/run-charts";
import { StatusBadge } from "@/app/ui/status-badge";
import { LogStream } from "./log-stream";
import { MARKER_SERIES } from "@/app/ui/inversion/inversion-data";

/** A setting's value in words; lists of objects (hand pick edits, inversion stages) item by item rather than as JSON. */
function settingText(v: unknown, unit: string | null): string {
  return Array.isArray(v) && v.some((x) => x !== null && typeof x === "object" && !Array.isArray(x)) ? formatReadable(v, unit) : formatSettingValue(v, unit);
}

const DOWNLOAD_WORDS = { segy: "SEG-Y", csv: "CSV", json: "JSON" } as const;

/**
 * Steps whose picks can be edited by hand, and the page that does it (saving reruns from the
 * step). `readerWords`: the page also shows the result to those who may not rerun.
 */
const PICK_EDITORS: Record<string, { path: string; words: string; readerWords?: string }> = {
  "first-arrivals": { path: "picks", words: "Edit picks by hand…" },
  "dispersion-image": { path: "dispersion-picks", words: "Edit dispersion picks…", readerWords: "Dispersion image and picks" },
};

/** One step of a run: its validated settings, inputs and outputs, summary, curves and log. */
export function StepPanel({
  run,
  step,
  canRerun,
  live,
  docs = [],
}: {
  run: RunView;
  step: StepView;
  canRerun: boolean;
  live: boolean;
  /** The step type's settings documentation: `.describe()` text with the unit. */
  docs?: Array<{ name: string; description: string }>;
}) {
  const changed = run.overrides[step.label] ?? {};
  const described = new Map(docs.map((d) => [d.name, d.description]));
  return (
    <section className="card space-y-5 p-4" aria-label={`Step ${step.label}`} data-testid="step-panel">
      <header className="flex flex-wrap items-start justify-between gap-3">
        <div>
          <h2 className="flex items-center gap-2">{step.label} <StatusBadge status={step.status} /></h2>
          <p className="text-xs muted">
            {step.stepId} version {step.stepVersion} · {formatDuration(step.durationMs)} · started {formatTime(step.startedAt)}
            {step.cacheHit ? ` · result reused${step.cacheSourceRunId ? ` from run ${step.cacheSourceRunId}` : ""} (same step, settings and inputs)` : ""}
          </p>
        </div>
        <div className="flex flex-wrap items-center gap-2">
          {step.status === "succeeded" && PICK_EDITORS[step.stepId] && ((canRerun && !live) || PICK_EDITORS[step.stepId].readerWords) ? (
            <Link href={`/runs/${run.id}/${PICK_EDITORS[step.stepId].path}?step=${encodeURIComponent(step.label)}`} className="btn" data-testid={canRerun && !live ? "edit-picks-link" : "view-picks-link"}>
              {canRerun && !live ? PICK_EDITORS[step.stepId].words : PICK_EDITORS[step.stepId].readerWords}
            </Link>
          ) : null}
          {canRerun && !live ? (
            <Link href={`/runs/${run.id}/rerun?from=${encodeURIComponent(step.label)}`} className="btn-primary" data-testid="rerun-button">
              Rerun from this step…
            </Link>
          ) : null}
        </div>
      </header>
      {step.error ? <p role="alert" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad">{step.error}</p> : null}

      <div className="grid gap-5 lg:grid-cols-2">
        <div>
          <h3 className="mb-1 text-xs font-semibold uppercase tracking-wide text-ink-soft">Settings used</h3>
          <table className="w-full table-fixed text-sm" data-testid="step-params">
            <tbody>
              {Object.entries(step.params).map(([k, v]) => {
                const name = readableName(k);
                const description = described.get(k);
                const unit = name.unit ?? unitOfDescription(description);
                return (
                  <tr key={k} className={`border-t border-line ${k in changed ? "bg-warn-soft" : ""}`}>
                    <td className="w-1/2 py-1 pr-3 align-top text-xs" title={description}>
                      <span className="text-ink">{name.words}</span>
                      <span className="block font-mono text-[10px] text-ink-faint">{k}</span>
                    </td>
                    <td className="py-1 align-top text-xs tabular-nums break-words">{settingText(v, unit)}{k in changed ? <span className="ml-2 rounded bg-warn px-1 text-[10px] text-white">changed in this rerun</span> : null}</td>
                  </tr>
                );
              })}
              {Object.keys(step.params).length === 0 ? <tr><td className="py-1 text-xs muted">No settings.</td></tr> : null}
            </tbody>
          </table>
        </div>
        <div className="space-y-4">
          <div>
            <h3 className="mb-1 text-xs font-semibold uppercase tracking-wide text-ink-soft">Inputs and outputs</h3>
            <dl className="grid grid-cols-[auto_1fr] gap-x-3 gap-y-0.5 text-xs">
              {Object.entries(step.inputs).map(([slot, hash]) => (
                <div key={`in-${slot}`} className="contents"><dt className="muted">in · {slot}</dt><dd className="font-mono" title={hash}>{shortHash(hash)}{step.inputSources?.[slot] ? <span className="muted"> from {step.inputSources[slot].from}{step.inputSources[slot].explicit ? " (named in the file)" : ""}</span> : null}</dd></div>
              ))}
              {Object.entries(step.outputs).map(([slot, hash]) => (
                <div key={`out-${slot}`} className="contents">
                  <dt className="muted">out · {slot}</dt>
                  <dd>
                    <span className="font-mono" title={hash}>{shortHash(hash)}</span>
                    {step.status === "succeeded" ? (
                      <a className="ml-2 text-accent hover:underline" href={stepDownloadHref(run.id, step.label, slot)} download data-testid={`download-${slot}`}>
                        download {DOWNLOAD_WORDS[formatOfSlot(slot)]}
                      </a>
                    ) : null}
                  </dd>
                </div>
              ))}
              <dt className="muted">cache key</dt><dd className="font-mono" title={step.cacheKey ?? ""}>{shortHash(step.cacheKey)}</dd>
            </dl>
          </div>
          {step.summary ? (
            <div>
              <h3 className="mb-1 text-xs font-semibold uppercase tracking-wide text-ink-soft">Summary</h3>
              <dl className="grid grid-cols-[auto_1fr] gap-x-3 gap-y-0.5 text-xs">
                {Object.entries(step.summary).map(([k, v]) => {
                  const name = readableName(k);
                  return (
                    <div key={k} className="contents">
                      <dt className="muted" title={k}>{name.words}</dt>
                      <dd className="tabular-nums break-words">{formatSettingValue(v, name.unit)}</dd>
                    </div>
                  );
                })}
              </dl>
            </div>
          ) : null}
        </div>
      </div>

      {step.series.some((s) => !MARKER_SERIES.has(s.name)) ? (
        <div className="grid gap-3 lg:grid-cols-2">
          {step.series.filter((s) => !MARKER_SERIES.has(s.name)).map((s) => <StepSeriesChart key={s.name} series={s} />)}
        </div>
      ) : null}

      <div>
        <h3 className="mb-1 text-xs font-semibold uppercase tracking-wide text-ink-soft">Log</h3>
        <LogStream key={step.id} runId={run.id} runStepId={step.id} live={live && (step.status === "running" || step.status === "waiting")} />
        {step.cacheHit && step.cacheSourceRunId ? (
          <p className="mt-1 text-xs muted">
            The result was reused: its computation, with every warning, is logged in{" "}
            <Link className="text-accent hover:underline" href={`/runs/${step.cacheSourceRunId}?step=${encodeURIComponent(step.label)}`}>run {step.cacheSourceRunId}</Link>.
          </p>
        ) : null}
      </div>
    </section>
  );
}
