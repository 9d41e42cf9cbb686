"use client";

import { useQuery } from "@tanstack/react-query";
import { artifactQueries } from "@/app/lib/queries";
import type { RunView } from "@/app/lib/view-types";
import { SpectrumChart, StepDurationsChart } from "@/app/ui/charts/run-charts";
import { ModelSection } from "@/app/ui/model/model-section";
import { SnapshotPlayer } from "@/app/ui/model/snapshot-player";
import { GatherViewer, type GatherSource } from "@/app/ui/traces/gather-viewer";

/** Every step output of a slot, in pipeline order, deduplicated by content hash. */
function outputsOf(run: RunView, slot: string): GatherSource[] {
  const seen = new Set<string>();
  const out: GatherSource[] = [];
  for (const s of run.steps) {
    const hash = s.outputs[slot];
    if (!hash || seen.has(hash)) continue;
    seen.add(hash);
    out.push({ key: `${s.label}:${slot}`, label: `${slot === "gathers" ? "after" : slot + " from"} ${s.label}`, hash });
  }
  return out;
}

function SnapshotBlock({ hash, label }: { hash: string; label: string }) {
  const q = useQuery(artifactQueries.outline(hash));
  if (!q.data || q.data.kind !== "snapshots" || !("timesS" in q.data)) return null;
  return (
    <div>
      <h3 className="mb-1 font-medium">Wavefield snapshots · {label} · shot {q.data.shotId}</h3>
      <SnapshotPlayer hash={hash} frameCount={q.data.timesS.length} timesS={q.data.timesS} />
    </div>
  );
}

/** The results of a run: gathers before and after, observed against synthetic, models, snapshots, spectra, durations. */
export function RunResults({ run }: { run: RunView }) {
  const gathers = outputsOf(run, "gathers");
  const synthetic = outputsOf(run, "synthetic");
  const lines = [...outputsOf(run, "picks").slice(-1), ...outputsOf(run, "mutes").slice(-1)].map((l) => ({
    ...l,
    label: l.key.endsWith(":picks") ? "first-arrival picks" : "mute lines",
  }));
  const models = run.steps.filter((s) => s.outputs.model).map((s) => ({ label: s.label, hash: s.outputs.model }));
  const uniqueModels = models.filter((m, i) => models.findIndex((x) => x.hash === m.hash) === i);
  const snapshots = run.steps.filter((s) => s.outputs.snapshots).map((s) => ({ label: s.label, hash: s.outputs.snapshots }));
  const spectra = outputsOf(run, "spectra");
  const lastGathers = gathers.at(-1);
  const finishedSteps = run.steps.filter((s) => s.durationMs !== null);

  return (
    <div className="space-y-6">
      {gathers.length ? (
        <section className="card p-4" aria-label="Gathers before and after">
          <h2 className="mb-1">Gathers, step by step</h2>
          <p className="mb-3 text-xs muted">Choose what to look at and what to compare it with: the gathers before and after any step of this run.</p>
          <GatherViewer
            sources={[...gathers, ...synthetic]}
            initialA={lastGathers?.key}
            initialB={gathers.length > 1 ? gathers.at(-2)?.key : undefined}
            lineSources={lines}
          />
        </section>
      ) : null}

      {synthetic.length && lastGathers ? (
        <section className="card p-4" aria-label="Observed against synthetic">
          <h2 className="mb-1">Observed against synthetic</h2>
          <p className="mb-3 text-xs muted">Field gathers in dark grey, modelled gathers in orange, trace by trace.</p>
          <GatherViewer sources={[lastGathers, ...synthetic]} initialA={lastGathers.key} initialB={synthetic.at(-1)!.key} initialMode="overlay" />
        </section>
      ) : null}

      {uniqueModels.map((m) => (
        <section key={m.hash} className="card p-4" aria-label={`Model from ${m.label}`}>
          <ModelSection hash={m.hash} positionsHash={lastGathers?.hash} title={`Model from ${m.label}`} />
        </section>
      ))}

      {snapshots.length ? (
        <section className="card space-y-4 p-4" aria-label="Wavefield snapshots">
          {snapshots.map((s) => <SnapshotBlock key={s.hash + s.label} hash={s.hash} label={s.label} />)}
        </section>
      ) : null}

      <section className="grid gap-4 lg:grid-cols-2" aria-label="Charts">
        {spectra.map((s) => <SpectrumChart key={s.key} hash={s.hash} />)}
        {finishedSteps.length ? (
          <figure className="card p-3">
            <figcaption className="mb-1 text-xs font-medium text-ink-soft">Step durations (light: result reused)</figcaption>
            <StepDurationsChart steps={finishedSteps} />
          </figure>
        ) : null}
      </section>
    </div>
  );
}
