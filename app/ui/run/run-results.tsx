"use client";

import type { RunView } from "@/app/lib/view-types";
import { SpectrumChart, StepDurationsChart } from "@/app/ui/charts/run-charts";
import { modelHeading, modelKindOf } from "@/app/ui/model/model-kind";
import { ModelPair, type ModelChoice } from "@/app/ui/model/model-pair";
import { ModelSection } from "@/app/ui/model/model-section";
import { SnapshotPanel } from "@/app/ui/model/snapshot-player";
import { GatherViewer, type GatherSource } from "@/app/ui/traces/gather-viewer";
import type { MisfitSettings } from "@/app/ui/traces/misfit-residual";

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

/** The misfit step's settings of a run (the last misfit step), for drawing differences on its scale. */
function misfitSettingsOf(run: RunView): MisfitSettings | undefined {
  const step = [...run.steps].reverse().find((s) => s.stepId === "misfit");
  if (!step) return undefined;
  const p = step.params as { measure?: MisfitSettings["measure"]; normaliseTraces?: boolean; windowStartMs?: number; windowEndMs?: number };
  return { measure: p.measure ?? "normalised-correlation", normaliseTraces: p.normaliseTraces ?? true, windowStartMs: p.windowStartMs, windowEndMs: p.windowEndMs };
}

/** The results of a run: gathers before and after, observed against synthetic, models, snapshots, spectra, durations. */
export function RunResults({ run }: { run: RunView }) {
  const gathers = outputsOf(run, "gathers");
  const synthetic = outputsOf(run, "synthetic");
  const lines = [...outputsOf(run, "picks").slice(-1), ...outputsOf(run, "mutes").slice(-1)].map((l) => ({
    ...l,
    label: l.key.endsWith(":picks") ? "first-arrival picks" : "mute lines",
  }));
  const models: ModelChoice[] = [];
  for (const s of run.steps) {
    const hash = s.outputs.model;
    if (!hash || models.some((m) => m.hash === hash)) continue;
    models.push({ key: `${s.label}:model`, hash, kind: modelKindOf(s.stepId, s.summary), source: `${s.label}, run ${run.id}` });
  }
  const snapshots = run.steps.filter((s) => s.outputs.snapshots).map((s) => ({ label: s.label, hash: s.outputs.snapshots }));
  const spectra = outputsOf(run, "spectra");
  const lastGathers = gathers.at(-1);
  const finishedSteps = run.steps.filter((s) => s.durationMs !== null);
  const misfit = misfitSettingsOf(run);
  // When the run's results change (a live run finishing a step), the viewers start afresh with
  // defaults for the new set of results instead of keeping choices made for the old one.
  const viewerKey = [...gathers, ...synthetic, ...lines].map((g) => g.hash).join(",");

  return (
    <div className="space-y-6">
      {gathers.length ? (
        <section className="card p-4" aria-label="Gathers before and after">
          <h2 className="mb-1">Gathers, step by step</h2>
          <p className="mb-3 text-xs muted">Choose what to look at and what to compare it with: the gathers before and after any step of this run.</p>
          <GatherViewer
            key={viewerKey}
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
          <p className="mb-3 text-xs muted">
            Field gathers against modelled gathers, trace by trace.{misfit ? " With the difference, both are put on the scale the misfit step uses and the difference is what it measures." : ""}
          </p>
          <GatherViewer key={viewerKey} sources={[lastGathers, ...synthetic]} initialA={lastGathers.key} initialB={synthetic.at(-1)!.key} initialMode={misfit ? "difference" : "overlay"} misfit={misfit} />
        </section>
      ) : null}

      {models.map((m) => (
        <section key={m.hash} className="card p-4" aria-label={modelHeading(m.kind)}>
          <ModelSection hash={m.hash} positionsHash={lastGathers?.hash} kind={m.kind} source={m.source} />
        </section>
      ))}

      {models.length >= 2 ? (
        <section className="card p-4" aria-label="Two models side by side">
          <h2 className="mb-2">Two models side by side</h2>
          <ModelPair choices={models} initial={[models[0].key, models.at(-1)!.key]} positionsHash={lastGathers?.hash} />
        </section>
      ) : null}

      {snapshots.length ? (
        <section className="card space-y-4 p-4" aria-label="Wavefield snapshots">
          <SnapshotPanel sets={snapshots} positionsHash={lastGathers?.hash} runId={run.id} />
        </section>
      ) : null}

      <section className="grid gap-4 lg:grid-cols-2" aria-label="Charts">
        {spectra.map((s) => <SpectrumChart key={s.key} hash={s.hash} title={`Mean amplitude spectrum · ${s.label.replace(/^spectra from /, "")}`} />)}
        {finishedSteps.length ? <StepDurationsChart steps={finishedSteps} /> : null}
      </section>
    </div>
  );
}
