"use client";

import { useEffect, useMemo, useState } from "react";
import { keepPreviousData, useQuery } from "@tanstack/react-query";
import { CartesianGrid, Legend, Line, LineChart, ResponsiveContainer, Tooltip, XAxis, YAxis } from "recharts";
import { artifactQueries } from "@/app/lib/queries";
import { DIVERGING, SEQUENTIAL } from "@/app/ui/model/colour-maps";
import { InversionCautions } from "./cautions";
import { FieldCanvas } from "./field-canvas";
import { depthProfile, modelDifference, symmetricLimit, valueRange, type IterationFrame } from "./inversion-data";
import { inversionQueries } from "./queries";

export type Parameter = "vs" | "vp" | "rho";
export const PARAMETERS: Record<Parameter, { label: string; short: string; unit: string; index: number }> = {
  vs: { label: "S-wave velocity", short: "Vs", unit: "m/s", index: 0 },
  vp: { label: "P-wave velocity", short: "Vp", unit: "m/s", index: 1 },
  rho: { label: "Density", short: "Density", unit: "kg/m³", index: 2 },
};

/** Inverted parameters from the step's `invertFor` setting. */
export function invertedParameters(invertFor: unknown): Parameter[] {
  if (invertFor === "vs-vp-rho") return ["vs", "vp", "rho"];
  if (invertFor === "vs-vp") return ["vs", "vp"];
  return ["vs"];
}

const PLAY_MS = 900;

/** Which iteration a frame is, in words. */
export function frameCaption(frame: IterationFrame | undefined): string {
  if (!frame) return "No model yet";
  if (frame.iteration === 0 || !frame.meta) return "Iteration 0: the starting model (the step's input)";
  const m = frame.meta;
  return `Iteration ${frame.iteration}: stage ${m.stage}, iteration ${m.stageIteration} of the stage (${m.lowPassHz} Hz, ${m.measure}), misfit ${Number.isFinite(m.misfit) ? m.misfit.toPrecision(4) : "?"}`;
}

/**
 * The model after any recorded iteration: a slider and a player over the iterations, the
 * model of each inverted parameter on the starting model's colour bar, its difference from the
 * starting model, the gradient of that iteration, and a depth profile at a chosen position.
 */
export function ModelIterations({
  frames,
  parameters,
  index,
  onIndex,
}: {
  frames: IterationFrame[];
  parameters: Parameter[];
  index: number;
  onIndex: (i: number) => void;
}) {
  const [param, setParam] = useState<Parameter>(parameters[0] ?? "vs");
  const [diffUnit, setDiffUnit] = useState<"abs" | "pct">("abs");
  const [playing, setPlaying] = useState(false);
  const [pickX, setPickX] = useState<number | null>(null);
  const frame = frames[Math.min(index, frames.length - 1)];
  const start = frames[0]?.iteration === 0 ? frames[0] : undefined;

  const startModel = useQuery({ ...artifactQueries.model(start?.modelHash ?? ""), enabled: Boolean(start) });
  const model = useQuery({ ...artifactQueries.model(frame?.modelHash ?? ""), enabled: Boolean(frame), placeholderData: keepPreviousData });
  // The colour bar spans the starting and the latest model, the same for every iteration shown.
  const latest = frames.at(-1);
  const latestModel = useQuery({ ...artifactQueries.model(latest?.modelHash ?? ""), enabled: Boolean(latest), placeholderData: keepPreviousData });
  const gradient = useQuery({ ...inversionQueries.field(frame?.gradientHash ?? ""), enabled: Boolean(frame?.gradientHash), placeholderData: keepPreviousData });

  useEffect(() => {
    if (!playing) return;
    const t = window.setTimeout(() => {
      if (index >= frames.length - 1) setPlaying(false);
      else onIndex(index + 1);
    }, PLAY_MS);
    return () => window.clearTimeout(t);
  }, [playing, index, frames.length, onIndex]);

  const grid = model.data?.header ?? startModel.data?.header ?? null;
  const n = grid ? grid.nx * grid.nz : 0;
  const p = PARAMETERS[param];
  const startValues = useMemo(() => (startModel.data ? startModel.data.payload.subarray(p.index * n, (p.index + 1) * n) : null), [startModel.data, p.index, n]);
  const values = useMemo(() => (model.data ? model.data.payload.subarray(p.index * n, (p.index + 1) * n) : null), [model.data, p.index, n]);
  const latestValues = useMemo(() => (latestModel.data && n > 0 && latestModel.data.payload.length >= (p.index + 1) * n ? latestModel.data.payload.subarray(p.index * n, (p.index + 1) * n) : null), [latestModel.data, p.index, n]);
  const limits = useMemo(() => {
    const ranges = [startValues, latestValues].filter((v): v is Float32Array => v !== null).map((v) => valueRange(v));
    if (ranges.length === 0) return values ? valueRange(values) : null;
    return { lo: Math.min(...ranges.map((r) => r.lo)), hi: Math.max(...ranges.map((r) => r.hi)) };
  }, [startValues, latestValues, values]);
  const diff = useMemo(() => (values && startValues && values.length === startValues.length ? modelDifference(values, startValues) : null), [values, startValues]);
  const diffValues = diff ? (diffUnit === "abs" ? diff.absolute : diff.percent) : null;
  const diffLimit = diffValues ? Math.max(symmetricLimit(diffValues), diffUnit === "abs" ? 1 : 0.1) : 1;
  const gradValues = useMemo(() => {
    const g = gradient.data;
    if (!g) return null;
    const k = g.header.fields.indexOf(param);
    if (k < 0) return null;
    const m = g.header.nx * g.header.nz;
    return g.payload.subarray(k * m, (k + 1) * m);
  }, [gradient.data, param]);
  const gradLimit = gradValues ? symmetricLimit(gradValues) || 1 : 1;
  const x = pickX ?? (grid ? grid.originX + ((grid.nx - 1) * grid.spacingM) / 2 : 0);
  const profile = useMemo(() => {
    if (!grid || !values) return null;
    const cur = depthProfile(values, grid, x);
    const st = startValues ? depthProfile(startValues, grid, x) : null;
    return { x: cur.x, rows: cur.depths.map((d, i) => ({ depth: d, current: cur.values[i], start: st ? st.values[i] : undefined })) };
  }, [grid, values, startValues, x]);

  const caption = frameCaption(frame);
  const showing = frame?.meta ? `iteration ${frame.iteration} (stage ${frame.meta.stage})` : "the starting model";

  return (
    <section className="space-y-3" aria-label="Model after each iteration" data-testid="inversion-model">
      <div className="flex flex-wrap items-center gap-3">
        <h3 className="font-medium">Model after each iteration</h3>
        {parameters.length > 1 ? (
          <div role="radiogroup" aria-label="Inverted parameter" className="flex gap-1">
            {parameters.map((f) => (
              <button key={f} type="button" role="radio" aria-checked={param === f} onClick={() => setParam(f)} className={`rounded-md px-2.5 py-1 text-xs ${param === f ? "bg-accent text-white" : "border border-line bg-panel"}`}>
                {PARAMETERS[f].label}
              </button>
            ))}
          </div>
        ) : (
          <span className="text-xs muted">Inverted for {PARAMETERS[parameters[0] ?? "vs"].label} ({PARAMETERS[parameters[0] ?? "vs"].short}); Vp and density held.</span>
        )}
      </div>

      <div className="flex flex-wrap items-center gap-3 rounded-md border border-line bg-panel px-3 py-2">
        <button
          type="button"
          className="btn"
          onClick={() => {
            if (!playing && index >= frames.length - 1) onIndex(0);
            setPlaying(!playing);
          }}
          disabled={frames.length < 2}
          data-testid="iteration-play"
          aria-label={playing ? "Pause" : "Play the iterations"}
        >
          {playing ? "❚❚ Pause" : "▶ Play"}
        </button>
        <label className="flex min-w-[220px] flex-1 items-center gap-2 text-xs">
          <span className="muted">Iteration</span>
          <input
            type="range"
            min={0}
            max={Math.max(0, frames.length - 1)}
            step={1}
            value={Math.min(index, Math.max(0, frames.length - 1))}
            onChange={(e) => {
              setPlaying(false);
              onIndex(Number(e.target.value));
            }}
            className="flex-1"
            aria-label="Iteration shown"
            aria-valuetext={caption}
            data-testid="iteration-slider"
            disabled={frames.length < 2}
          />
          <span className="font-mono">{frame ? frame.iteration : "–"} / {frames.at(-1)?.iteration ?? 0}</span>
        </label>
        <p className="w-full text-sm font-medium" data-testid="iteration-shown" aria-live="polite">{caption}</p>
      </div>

      <div className="lg:hidden">
        <InversionCautions />
      </div>
      {model.error ? <p role="alert" className="text-sm text-bad">{model.error.message}</p> : null}
      {grid && values && limits ? (
        <div className="grid gap-4 lg:grid-cols-[1fr_260px]">
          <div className="space-y-4">
            <figure>
              <figcaption className="mb-1 text-xs font-medium text-ink-soft">
                {p.label} {p.short !== p.label ? `(${p.short})` : ""}, {showing} · colour bar the same for every iteration: the range of the starting and the latest model ({Math.round(limits.lo)}–{Math.round(limits.hi)} {p.unit})
              </figcaption>
              <FieldCanvas values={values} grid={grid} lo={limits.lo} hi={limits.hi} lut={SEQUENTIAL} unit={p.unit} label={`${p.label}, ${showing}`} pickX={x} onPick={setPickX} testId="iteration-model-canvas" />
            </figure>
            {diffValues ? (
              <figure>
                <figcaption className="mb-1 flex flex-wrap items-center gap-2 text-xs font-medium text-ink-soft">
                  <span>Change from the starting model, {showing} (blue slower, red faster; colour bar centred on zero)</span>
                  <span role="radiogroup" aria-label="Unit of the change" className="flex gap-1">
                    {(["abs", "pct"] as const).map((u) => (
                      <button key={u} type="button" role="radio" aria-checked={diffUnit === u} onClick={() => setDiffUnit(u)} className={`rounded px-2 py-0.5 ${diffUnit === u ? "bg-accent text-white" : "border border-line bg-panel"}`}>
                        {u === "abs" ? p.unit : "%"}
                      </button>
                    ))}
                  </span>
                </figcaption>
                <FieldCanvas values={diffValues} grid={grid} lo={-diffLimit} hi={diffLimit} lut={DIVERGING} unit={diffUnit === "abs" ? p.unit : "%"} label={`Change of ${p.short} from the starting model`} pickX={x} onPick={setPickX} testId="iteration-difference-canvas" />
              </figure>
            ) : null}
            <figure>
              <figcaption className="mb-1 text-xs font-medium text-ink-soft">
                Gradient of the misfit with respect to {p.short} at {showing}, before preconditioning (red: raising {p.short} there raises the misfit; the update goes the other way)
              </figcaption>
              {gradValues && frame?.gradientHash ? (
                <FieldCanvas values={gradValues} grid={gradient.data!.header} lo={-gradLimit} hi={gradLimit} lut={DIVERGING} unit={`per ${p.unit}`} label={`Gradient for ${p.short}`} pickX={x} onPick={setPickX} testId="iteration-gradient-canvas" />
              ) : (
                <p className="text-xs muted">{frame?.iteration === 0 ? "The starting model has no gradient: choose an iteration." : gradient.isLoading ? "Loading the gradient…" : "No gradient recorded for this iteration."}</p>
              )}
            </figure>
          </div>
          <div className="space-y-3">
            <figure className="card p-3" data-testid="iteration-profile">
              <figcaption className="text-xs font-medium text-ink-soft">Depth profile at {profile ? profile.x.toFixed(1) : "–"} m, {showing} (click a section to move it)</figcaption>
              {profile ? (
                <div className="h-72">
                  <ResponsiveContainer width="100%" height="100%">
                    <LineChart data={profile.rows} layout="vertical" margin={{ top: 8, right: 10, bottom: 22, left: 4 }}>
                      <CartesianGrid stroke="#eef0ed" />
                      <XAxis type="number" domain={["auto", "auto"]} tick={{ fontSize: 10 }} label={{ value: `${p.short} (${p.unit})`, position: "insideBottom", offset: -12, fontSize: 10 }} />
                      <YAxis type="number" dataKey="depth" domain={["dataMin", "dataMax"]} tick={{ fontSize: 10 }} width={40} label={{ value: "Depth (m)", angle: -90, position: "insideLeft", fontSize: 10 }} />
                      <Tooltip formatter={(v) => `${Math.round(Number(v))} ${p.unit}`} labelFormatter={(d) => `${d} m deep`} />
                      <Legend wrapperStyle={{ fontSize: 10 }} verticalAlign="top" />
                      <Line dataKey="start" name="starting model" stroke="#8a9397" strokeDasharray="4 3" dot={false} isAnimationActive={false} />
                      <Line dataKey="current" name={frame?.iteration ? `iteration ${frame.iteration}` : "starting model"} stroke="#1f5f8b" strokeWidth={2} dot={false} isAnimationActive={false} />
                    </LineChart>
                  </ResponsiveContainer>
                </div>
              ) : null}
            </figure>
            {frame?.meta ? (
              <dl className="grid grid-cols-[auto_1fr] gap-x-3 gap-y-0.5 text-xs" data-testid="iteration-meta">
                <dt className="muted">stage</dt><dd>{frame.meta.stage} ({frame.meta.lowPassHz} Hz, {frame.meta.measure})</dd>
                <dt className="muted">misfit</dt><dd className="font-mono">{frame.meta.misfit.toPrecision(5)}</dd>
                <dt className="muted">step length</dt><dd className="font-mono">{frame.meta.stepLength.toPrecision(3)}</dd>
                {frame.meta.forwardSolves !== undefined ? <><dt className="muted">forward solves</dt><dd className="font-mono">{frame.meta.forwardSolves}</dd></> : null}
                {frame.meta.wallS !== undefined ? <><dt className="muted">wall time</dt><dd className="font-mono">{frame.meta.wallS.toFixed(1)} s</dd></> : null}
              </dl>
            ) : null}
            <div className="hidden lg:block">
              <InversionCautions />
            </div>
          </div>
        </div>
      ) : (
        <p className="text-sm muted">{frames.length ? "Loading the model…" : "No model recorded yet."}</p>
      )}
    </section>
  );
}
