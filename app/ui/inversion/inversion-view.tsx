"use client";

import { useEffect, useMemo, useRef, useState } from "react";
import { useQuery } from "@tanstack/react-query";
import type { RunView, StepView } from "@/app/lib/view-types";
import { StatusBadge } from "@/app/ui/status-badge";
import { iterationFrames, type IntermediateItem, type SeriesPoint } from "./inversion-data";
import { MeasureTable } from "./measure-table";
import { MisfitChart } from "./misfit-chart";
import { invertedParameters, ModelIterations, PARAMETERS } from "./model-iterations";
import { inversionQueries } from "./queries";
import { StageTraces } from "./stage-traces";
import { WaveletPanel, type WaveletChoice } from "./wavelet-chart";

/** Step id of the full-waveform inversion. */
export const INVERSION_STEP_ID = "waveform-inversion";

/** The inversion view of every waveform-inversion step of a run (nothing when there is none). */
export function InversionViews({ run, live }: { run: RunView; live: boolean }) {
  const steps = run.steps.filter((s) => s.stepId === INVERSION_STEP_ID);
  return (
    <>
      {steps.map((s) => (
        <InversionView key={s.id} run={run} step={s} live={live} />
      ))}
    </>
  );
}

/**
 * One inversion step: the misfit curve by stage, the model after any iteration with its
 * change and gradient, the source wavelets, observed against synthetic at the end of each
 * stage, and the cautions. Polls the recorded iterations while the run is live.
 */
export function InversionView({ run, step, live }: { run: RunView; step: StepView; live: boolean }) {
  const stepLive = live && (step.status === "running" || step.status === "waiting");
  const inter = useQuery(inversionQueries.intermediates(run.id, step.label, stepLive));
  const items = useMemo(() => inter.data?.intermediates ?? [], [inter.data]);
  const startHash = step.inputs.model ?? null;
  const frames = useMemo(() => iterationFrames(startHash, items), [startHash, items]);
  const misfit = useMemo<SeriesPoint[]>(() => step.series.find((s) => s.name === "misfit")?.points ?? [], [step.series]);
  const withLastWavelet = useMemo<SeriesPoint[]>(() => step.series.find((s) => s.name === "misfit-with-last-wavelet")?.points ?? [], [step.series]);
  const parameters = invertedParameters(step.params.invertFor);
  const stages = Array.isArray(step.params.stages) ? (step.params.stages as Array<Record<string, unknown>>) : [];

  // Follow the newest iteration while it runs, unless the slider was moved away from the end.
  const [index, setIndex] = useState<number | null>(null);
  const following = useRef(true);
  useEffect(() => {
    if (following.current) setIndex(null);
  }, [frames.length]);
  const shownIndex = index ?? Math.max(0, frames.length - 1);
  const onIndex = (i: number) => {
    following.current = i >= frames.length - 1;
    setIndex(i);
  };

  const waveletHash = step.inputs.wavelet ?? run.steps.find((s) => s.stepId === "source-wavelet")?.outputs.wavelet ?? null;
  const waveletFrom = run.steps.find((s) => s.outputs.wavelet === waveletHash)?.label ?? "the wavelet step";
  const lastMeta = frames.at(-1)?.meta;
  const waveletChoices = useMemo(() => waveletChoicesOf(waveletHash, waveletFrom, items), [waveletHash, waveletFrom, items]);

  return (
    <section className="card space-y-5 p-4" aria-label={`Inversion ${step.label}`} data-testid="inversion-view">
      <header className="flex flex-wrap items-start justify-between gap-3">
        <div>
          <h2 className="flex items-center gap-2">Full-waveform inversion · {step.label} <StatusBadge status={step.status} /></h2>
          <p className="text-xs muted">
            {stages.length} stage{stages.length === 1 ? "" : "s"} ({stages.map((s) => `${String(s.lowPassHz)} Hz`).join(" → ")}) · inverted for {parameters.map((p) => PARAMETERS[p].short).join(", ")} ·{" "}
            {lastMeta ? `${lastMeta.iteration} iteration${lastMeta.iteration === 1 ? "" : "s"} recorded, last in stage ${lastMeta.stage}` : "no iteration recorded yet"}
            {stepLive ? " · updating while it runs" : ""}
          </p>
        </div>
      </header>
      {inter.error ? <p role="alert" className="text-sm text-bad">{inter.error.message}</p> : null}

      <div className="grid gap-4 lg:grid-cols-2">
        <MisfitChart points={misfit} withLastWavelet={withLastWavelet} currentIteration={frames[shownIndex]?.iteration ?? null} />
        {waveletChoices.length > 0 ? <WaveletPanel choices={waveletChoices} /> : <p className="card p-3 text-sm muted">This inversion starts from a Ricker wavelet (no wavelet step).</p>}
      </div>

      {step.outputs.report ? <MeasureTable reportHash={step.outputs.report} /> : null}

      {startHash ? (
        <ModelIterations frames={frames} parameters={parameters} index={shownIndex} onIndex={onIndex} />
      ) : (
        <p className="text-sm muted">The step has no starting model among its inputs yet.</p>
      )}

      <StageTraces items={items} stages={stages} />
    </section>
  );
}

/**
 * The wavelets the view can draw: the starting ones (from the wavelet step, when there is one) and
 * those each stage modelled with, recorded at its start (intermediate results "wavelet").
 */
export function waveletChoicesOf(startHash: string | null, startFrom: string, items: readonly IntermediateItem[]): WaveletChoice[] {
  const choices: WaveletChoice[] = [];
  if (startHash) {
    choices.push({ key: "start", label: "the start", hash: startHash, caption: `Starting source wavelets, estimated by ${startFrom}` });
  }
  for (const w of items.filter((i) => i.kind === "wavelet").sort((a, b) => a.index - b.index)) {
    const m = w.meta ?? {};
    const fit = typeof m.meanRelativeResidual === "number" ? ` (mean relative residual of the fit ${m.meanRelativeResidual.toFixed(2)})` : "";
    const how = m.reestimated === true ? `re-estimated from the data against the model at the stage's start${fit}` : "the starting wavelets low-passed like the data";
    choices.push({
      key: `stage-${w.index}`,
      label: w.label ?? `stage ${w.index}`,
      hash: w.hash,
      caption: `Wavelets of ${w.label ?? `stage ${w.index}`}: ${how}; they begin before the source instant (the zero-phase band-pass spreads the pulse to both sides)`,
    });
  }
  return choices;
}
