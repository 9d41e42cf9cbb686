"use client";

import { useEffect, useMemo, useRef, useState } from "react";
import { useQuery } from "@tanstack/react-query";
import { artifactQueries } from "@/app/lib/queries";
import { measuredTraces, windowSamples, type IntermediateItem } from "./inversion-data";
import { useElementWidth } from "@/app/ui/use-element-width";

interface StageSettings {
  lowPassHz?: number;
  measure?: string;
  minOffsetM?: number;
  maxOffsetM?: number;
  windowStartMs?: number;
  windowEndMs?: number;
}

const M = { left: 50, right: 10, top: 22, bottom: 8 };

/** Wiggle traces on a canvas: time down (ms), traces across; `second` drawn over `first`. */
function Wiggles({
  first,
  second,
  traceCount,
  sampleCount,
  dtS,
  t0S,
  scale,
  title,
  testId,
  shownSamples,
}: {
  first: Float32Array;
  second?: Float32Array;
  traceCount: number;
  sampleCount: number;
  dtS: number;
  t0S: number;
  scale: number;
  title: string;
  testId: string;
  /** Samples drawn from the trace start (default all). */
  shownSamples?: number;
}) {
  const [wrap, width] = useElementWidth();
  const canvas = useRef<HTMLCanvasElement>(null);
  const height = 420;
  useEffect(() => {
    const c = canvas.current;
    if (!c || width === 0) return;
    const dpr = Math.min(2, window.devicePixelRatio || 1);
    c.width = Math.round(width * dpr);
    c.height = Math.round(height * dpr);
    const ctx = c.getContext("2d")!;
    ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
    ctx.fillStyle = "#fff";
    ctx.fillRect(0, 0, width, height);
    const pw = width - M.left - M.right;
    const ph = height - M.top - M.bottom;
    const spacing = pw / Math.max(1, traceCount);
    const amp = scale > 0 ? (0.9 * spacing) / scale : 0;
    const shown = Math.max(2, Math.min(sampleCount, shownSamples ?? sampleCount));
    const yOf = (k: number) => M.top + (k / Math.max(1, shown - 1)) * ph;
    const draw = (data: Float32Array, colour: string, lw: number) => {
      ctx.strokeStyle = colour;
      ctx.lineWidth = lw;
      for (let t = 0; t < traceCount; t++) {
        const x0 = M.left + (t + 0.5) * spacing;
        ctx.beginPath();
        const stride = Math.max(1, Math.floor(shown / ph / 2));
        for (let k = 0; k < shown; k += stride) {
          const x = x0 + data[t * sampleCount + k] * amp;
          if (k === 0) ctx.moveTo(x, yOf(k));
          else ctx.lineTo(x, yOf(k));
        }
        ctx.stroke();
      }
    };
    draw(first, "#38434a", 0.9);
    if (second) draw(second, "#d0611b", 1.1);
    ctx.strokeStyle = "#4a5559";
    ctx.lineWidth = 1;
    ctx.strokeRect(M.left + 0.5, M.top + 0.5, pw - 1, ph - 1);
    ctx.fillStyle = "#4a5559";
    ctx.font = "11px system-ui, sans-serif";
    ctx.textAlign = "right";
    ctx.textBaseline = "middle";
    const totalMs = (shown - 1) * dtS * 1000;
    const stepMs = totalMs > 400 ? 100 : totalMs > 150 ? 50 : totalMs > 60 ? 20 : 10;
    for (let ms = Math.ceil((t0S * 1000) / stepMs) * stepMs; ms <= t0S * 1000 + totalMs + 1e-6; ms += stepMs) {
      const k = (ms / 1000 - t0S) / dtS;
      ctx.fillRect(M.left - 4, yOf(k), 4, 1);
      ctx.fillText(String(Math.round(ms)), M.left - 6, yOf(k));
    }
    ctx.save();
    ctx.translate(12, M.top + ph / 2);
    ctx.rotate(-Math.PI / 2);
    ctx.textAlign = "center";
    ctx.fillText("Time (ms)", 0, 0);
    ctx.restore();
    ctx.textAlign = "left";
    ctx.textBaseline = "top";
    ctx.fillText(title, M.left, 4);
  }, [first, second, traceCount, sampleCount, shownSamples, dtS, t0S, scale, title, width]);
  return (
    <div ref={wrap} className="w-full">
      <canvas ref={canvas} style={{ width: "100%", height }} role="img" aria-label={title} data-testid={testId} />
    </div>
  );
}

function peakAbs(...arrays: Float32Array[]): number {
  let m = 0;
  for (const a of arrays) for (let i = 0; i < a.length; i++) m = Math.max(m, Math.abs(a[i]));
  return m;
}

/** When in a stage the synthetics were recorded: the model it started from, or the one it ended with. */
type Moment = "start" | "end";

/**
 * Observed against synthetic for a chosen shot at the start or the end of each stage (both
 * low-passed to the stage's corner), and their residual as the stage's misfit measure sees it.
 */
export function StageTraces({ items, stages }: { items: IntermediateItem[]; stages: StageSettings[] }) {
  const observed = items.filter((i) => i.kind === "observed").sort((a, b) => a.index - b.index);
  const atEnd = new Map(items.filter((i) => i.kind === "synthetic").map((i) => [i.index, i.hash]));
  const atStart = new Map(items.filter((i) => i.kind === "synthetic-start").map((i) => [i.index, i.hash]));
  const available = observed.filter((o) => atEnd.has(o.index) || atStart.has(o.index));
  const [stageChoice, setStageChoice] = useState<number | null>(null);
  const [momentChoice, setMomentChoice] = useState<Moment | null>(null);
  const [view, setView] = useState<"measured" | "recorded">("measured");
  const stage = stageChoice ?? available.at(-1)?.index ?? null;
  const moments: Moment[] = stage === null ? [] : [...(atStart.has(stage) ? (["start"] as const) : []), ...(atEnd.has(stage) ? (["end"] as const) : [])];
  // The end where there is one (the newest state of the stage), else its start.
  const moment: Moment | null = momentChoice && moments.includes(momentChoice) ? momentChoice : (moments.at(-1) ?? null);
  const obsHash = available.find((o) => o.index === stage)?.hash ?? "";
  const synHash = stage !== null && moment ? ((moment === "end" ? atEnd : atStart).get(stage) ?? "") : "";
  const outline = useQuery({ ...artifactQueries.outline(obsHash), enabled: Boolean(obsHash) });
  const gatherIds = outline.data?.kind === "gathers" && "gathers" in outline.data ? outline.data.gathers.map((g) => g.id) : [];
  const [shotChoice, setShotChoice] = useState<string | null>(null);
  const shot = shotChoice && gatherIds.includes(shotChoice) ? shotChoice : gatherIds[Math.floor(gatherIds.length / 2)] ?? null;
  const obs = useQuery({ ...artifactQueries.traces(obsHash, shot ?? ""), enabled: Boolean(obsHash && shot) });
  const syn = useQuery({ ...artifactQueries.traces(synHash, shot ?? ""), enabled: Boolean(synHash && shot) });
  const settings = stage !== null ? stages[stage - 1] : undefined;
  const measure = settings?.measure ?? "least-squares";

  const shown = useMemo(() => {
    if (!obs.data || !syn.data) return null;
    const h = obs.data.header;
    const sh = syn.data.header;
    if (h.traceCount !== sh.traceCount || h.sampleCount !== sh.sampleCount) return { kind: "error" as const, error: `Observed and synthetic gathers differ in size (${h.traceCount}×${h.sampleCount} against ${sh.traceCount}×${sh.sampleCount}).` };
    const { first, end } = windowSamples(settings, h.startTimeS, h.sampleIntervalS, h.sampleCount);
    const compared = h.offsetsM.map((o, t) => !h.dead[t] && Math.abs(o) >= (settings?.minOffsetM ?? 0) && Math.abs(o) <= (settings?.maxOffsetM ?? Infinity));
    const m = measuredTraces(measure, obs.data.payload, syn.data.payload, h.traceCount, h.sampleCount, first, end, compared);
    const comparedCount = compared.filter(Boolean).length;
    const shownSamples = Math.min(h.sampleCount, end + Math.ceil(0.1 * (end - first)));
    return { kind: "ok" as const, h, m, first, end, comparedCount, shownSamples };
  }, [obs.data, syn.data, settings, measure]);

  if (available.length === 0) {
    return (
      <section className="card p-4" aria-label="Observed against synthetic by stage" data-testid="stage-traces">
        <h3 className="font-medium">Observed against synthetic, by stage</h3>
        <p className="mt-2 text-sm muted">Recorded at the start and the end of each stage: none recorded yet.</p>
      </section>
    );
  }

  return (
    <section className="card space-y-3 p-4" aria-label="Observed against synthetic by stage" data-testid="stage-traces">
      <div className="flex flex-wrap items-end gap-3">
        <h3 className="font-medium">Observed against synthetic, by stage</h3>
        <label className="text-xs">
          <span className="label">Stage</span>
          <select className="field mt-1 w-auto" value={stage ?? ""} onChange={(e) => setStageChoice(Number(e.target.value))} data-testid="stage-select">
            {available.map((o) => <option key={o.index} value={o.index}>{o.label ?? `stage ${o.index}`}</option>)}
          </select>
        </label>
        <label className="text-xs">
          <span className="label">Model</span>
          <select className="field mt-1 w-auto" value={moment ?? ""} onChange={(e) => setMomentChoice(e.target.value as Moment)} data-testid="moment-select">
            {moments.map((m) => (
              <option key={m} value={m}>
                {m === "start" ? "at the stage's start" : "at the stage's end"}
              </option>
            ))}
          </select>
        </label>
        <label className="text-xs">
          <span className="label">Shot</span>
          <select className="field mt-1 w-auto" value={shot ?? ""} onChange={(e) => setShotChoice(e.target.value)} data-testid="shot-select">
            {gatherIds.map((id) => <option key={id} value={id}>{id}</option>)}
          </select>
        </label>
        <label className="text-xs">
          <span className="label">Traces drawn</span>
          <select className="field mt-1 w-auto" value={view} onChange={(e) => setView(e.target.value as "measured" | "recorded")}>
            <option value="measured">as the stage&apos;s measure sees them</option>
            <option value="recorded">low-passed, as recorded</option>
          </select>
        </label>
      </div>
      <p className="text-xs text-ink-soft" data-testid="measure-explanation">
        Stage {stage}, synthetics of the model {moment === "start" ? "it started from" : "it ended with"}: {settings?.lowPassHz !== undefined ? `low-passed at ${settings.lowPassHz} Hz, ` : ""}measure “{measure}”. {shown?.kind === "ok" ? shown.m.explanation : ""}
        {shown?.kind === "ok" ? ` Window ${((shown.h.startTimeS + shown.first * shown.h.sampleIntervalS) * 1000).toFixed(0)}–${((shown.h.startTimeS + (shown.end - 1) * shown.h.sampleIntervalS) * 1000).toFixed(0)} ms; ${shown.comparedCount} of ${shown.h.traceCount} traces compared (offset range and live traces), the others have no residual.` : ""}
      </p>
      {shown?.kind === "error" ? <p className="text-sm text-bad">{shown.error}</p> : null}
      {obs.error || syn.error ? <p className="text-sm text-bad">{(obs.error ?? syn.error)!.message}</p> : null}
      {shown?.kind === "ok" ? (
        <div className="grid gap-4 lg:grid-cols-2">
          {view === "measured" ? (
            <>
              <Wiggles first={shown.m.observed} second={shown.m.synthetic} traceCount={shown.h.traceCount} sampleCount={shown.h.sampleCount} dtS={shown.h.sampleIntervalS} t0S={shown.h.startTimeS} shownSamples={shown.shownSamples} scale={peakAbs(shown.m.observed, shown.m.synthetic)} title={`Shot ${shot}: observed (grey) and synthetic (orange)${measure.includes("normalised") ? ", unit-norm traces" : ""}`} testId="stage-overlay" />
              <Wiggles first={shown.m.residual} traceCount={shown.h.traceCount} sampleCount={shown.h.sampleCount} dtS={shown.h.sampleIntervalS} t0S={shown.h.startTimeS} shownSamples={shown.shownSamples} scale={peakAbs(shown.m.observed, shown.m.synthetic)} title="Residual (synthetic − observed), same scale" testId="stage-residual" />
            </>
          ) : (
            <>
              <Wiggles first={obs.data!.payload} second={syn.data!.payload} traceCount={shown.h.traceCount} sampleCount={shown.h.sampleCount} dtS={shown.h.sampleIntervalS} t0S={shown.h.startTimeS} shownSamples={shown.shownSamples} scale={peakAbs(obs.data!.payload, syn.data!.payload)} title={`Shot ${shot}: observed (grey) and synthetic (orange), low-passed, true amplitude`} testId="stage-overlay" />
              <Wiggles first={shown.m.residual} traceCount={shown.h.traceCount} sampleCount={shown.h.sampleCount} dtS={shown.h.sampleIntervalS} t0S={shown.h.startTimeS} shownSamples={shown.shownSamples} scale={peakAbs(shown.m.observed, shown.m.synthetic)} title="Residual as the measure sees it" testId="stage-residual" />
            </>
          )}
        </div>
      ) : !shown ? (
        <p className="text-xs muted">Loading the traces…</p>
      ) : null}
    </section>
  );
}
