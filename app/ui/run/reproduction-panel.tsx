"use client";

import { useRef, useState, useTransition } from "react";
import { useQueryClient } from "@tanstack/react-query";
import { startReproduction } from "@/app/lib/actions/reproductions";
import type { ReproductionView, RunView } from "@/app/lib/view-types";
import { formatTime } from "@/app/ui/format";

const VERDICT: Record<ReproductionView["verdict"], { words: string; tone: string }> = {
  running: { words: "Reproducing…", tone: "bg-accent-soft text-accent-strong" },
  stopped: { words: "Stopped before a verdict (its process ended)", tone: "bg-warn-soft text-warn" },
  identical: { words: "Reproduced: every artifact identical", tone: "bg-ok-soft text-ok" },
  "within-tolerance": { words: "Reproduced within tolerance", tone: "bg-ok-soft text-ok" },
  different: { words: "Not reproduced: results differ", tone: "bg-bad-soft text-bad" },
  failed: { words: "Could not be reproduced", tone: "bg-bad-soft text-bad" },
};

function Verdict({ r }: { r: ReproductionView }) {
  const v = VERDICT[r.verdict];
  const c = r.counts;
  return (
    <div className={`rounded-md px-3 py-2 text-xs ${v.tone}`} data-testid="reproduction-verdict" data-verdict={r.verdict}>
      <div className="font-medium">{v.words}</div>
      {r.verdict === "running" ? (
        <div className="mt-1">
          <span className="block h-1.5 overflow-hidden rounded bg-white/70" role="progressbar" aria-valuemin={0} aria-valuemax={100} aria-valuenow={Math.round(r.progress * 100)} aria-label="Reproduction progress">
            <span className="block h-full bg-accent transition-all" style={{ width: `${Math.round(r.progress * 100)}%` }} />
          </span>
          <span className="mt-0.5 block">{Math.round(r.progress * 100)} % · {r.progressMessage ?? "starting"}</span>
        </div>
      ) : null}
      {c ? (
        <div className="mt-0.5">
          {c.identical} identical{c["within-tolerance"] ? `, ${c["within-tolerance"]} within a relative difference of ${r.relativeTolerance}` : ""}
          {c.different ? `, ${c.different} different` : ""}
          {c.missing ? `, ${c.missing} missing` : ""}
          {r.finishedAt ? ` · ${Math.max(1, Math.round((r.finishedAt - r.startedAt) / 1000))} s` : ""}
        </div>
      ) : null}
      {r.error ? <div className="mt-0.5 break-words">{r.error}</div> : null}
    </div>
  );
}

/**
 * Reproducing the run (for leads and auditors): executed again from its recorded inputs and
 * settings without the cache, every artifact compared; the latest verdict with what differed,
 * and earlier ones.
 */
export function ReproductionPanel({ run, canReproduce }: { run: RunView; canReproduce: boolean }) {
  const client = useQueryClient();
  const [error, setError] = useState<string | null>(null);
  const [pending, startTransition] = useTransition();
  const sending = useRef(false);
  const latest = run.reproductions[0];
  const running = run.reproductions.some((r) => r.verdict === "running");

  function reproduce() {
    if (sending.current) return;
    sending.current = true;
    setError(null);
    startTransition(async () => {
      try {
        const state = await startReproduction({ runId: run.id });
        if (state.error) setError(state.error);
        await client.invalidateQueries({ queryKey: ["run", run.id] });
      } finally {
        sending.current = false;
      }
    });
  }

  if (!canReproduce && !latest) return null;
  return (
    <section className="card p-4 text-sm" aria-label="Reproduction" data-testid="reproduction-panel">
      <h2 className="mb-2">Reproduction</h2>
      <p className="mb-2 text-xs muted">The run executed again from its recorded field files and settings in a scratch folder, without the cache; every result is compared with the recorded one by its SHA-256 hash.</p>
      {latest ? (
        <div className="space-y-2">
          <Verdict r={latest} />
          <p className="text-xs muted">Asked by {latest.requestedBy}, {formatTime(latest.startedAt)}</p>
          {latest.differences.length ? (
            <ul className="space-y-1 text-xs" data-testid="reproduction-differences">
              {latest.differences.map((d) => (
                <li key={d.label}>
                  <span className="font-medium">{d.label}</span>: {d.outcome}
                  {d.cacheKeyMatches ? "" : " (settings, inputs or step version differ from the record)"}
                  <ul className="ml-3">
                    {d.artifacts.map((a) => (
                      <li key={`${a.kind}-${a.name}`}>
                        {a.kind === "output" ? "result" : "intermediate"} <span className="font-mono">{a.name}</span>: {a.outcome}
                        {a.maxRelativeDifference !== null ? `, largest relative difference ${a.maxRelativeDifference.toExponential(2)}` : ""}
                        {a.where ? ` at ${a.where}` : ""}
                        {a.note ? <span className="block muted">{a.note}</span> : null}
                      </li>
                    ))}
                  </ul>
                </li>
              ))}
            </ul>
          ) : null}
        </div>
      ) : (
        <p className="mb-2 text-xs muted">Not reproduced yet.</p>
      )}
      {canReproduce ? (
        <div className="mt-2">
          {error ? <p role="alert" className="mb-1 text-xs text-bad">{error}</p> : null}
          <button type="button" className="btn" disabled={pending || running || run.status !== "succeeded"} onClick={reproduce} data-testid="reproduce-button" title={run.status !== "succeeded" ? "Only a succeeded run can be reproduced" : undefined}>
            {pending ? "Starting…" : running ? "Reproducing…" : "Reproduce this run"}
          </button>
        </div>
      ) : null}
      {run.reproductions.length > 1 ? (
        <details className="mt-2 text-xs">
          <summary className="cursor-pointer muted">Earlier reproductions ({run.reproductions.length - 1})</summary>
          <ul className="mt-1 space-y-0.5">
            {run.reproductions.slice(1).map((r) => (
              <li key={r.id}>{formatTime(r.startedAt)} · {r.requestedBy} · {VERDICT[r.verdict].words}</li>
            ))}
          </ul>
        </details>
      ) : null}
    </section>
  );
}
