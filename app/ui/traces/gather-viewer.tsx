"use client";

import { useMemo, useState } from "react";
import { useQuery } from "@tanstack/react-query";
import { artifactQueries } from "@/app/lib/queries";
import type { TraceHeaderWire } from "@/app/lib/view-types";
import { fullWindow, peaks, type DisplaySettings, type GatherView, type Overlays, type ViewWindow } from "./draw-traces";
import { AmplitudeKey } from "./amplitude-key";
import { misfitPanels, type MisfitSettings } from "./misfit-residual";
import { pairGather } from "./pair-gathers";
import { TraceCanvas } from "./trace-canvas";

/** A gathers artifact the viewer can show, e.g. the output of one step. */
export interface GatherSource {
  key: string;
  label: string;
  hash: string;
}

type CompareMode = "single" | "side-by-side" | "flip" | "difference" | "overlay";

const MODE_LABELS: Record<CompareMode, string> = {
  single: "One gather",
  "side-by-side": "Side by side",
  flip: "Flip in place",
  difference: "With difference",
  overlay: "Overlaid (two colours)",
};

function toView(h: TraceHeaderWire, payload: Float32Array): GatherView {
  return { data: payload, traces: h.traceCount, samples: h.sampleCount, dtS: h.sampleIntervalS, t0S: h.startTimeS, offsetsM: h.offsetsM, dead: h.dead };
}

/**
 * The gather viewer: one gather, or the same gather from two sources (before/after, two runs,
 * observed against synthetic) side by side, flipping in place, with their difference, or
 * overlaid. Display controls and the zoom are shared by all panels.
 */
export function GatherViewer({
  sources,
  initialA,
  initialB,
  initialMode,
  lineSources = [],
  misfit,
}: {
  sources: GatherSource[];
  initialA?: string;
  initialB?: string;
  initialMode?: CompareMode;
  /** Picks and mutes artifacts that can be drawn over the traces. */
  lineSources?: GatherSource[];
  /**
   * Observed against synthetic: the misfit step's settings. The difference is then drawn on the
   * misfit's common scale (misfit-residual.ts) rather than as a plain subtraction.
   */
  misfit?: MisfitSettings;
}) {
  const [aKey, setAKey] = useState(initialA ?? sources.at(-1)?.key ?? "");
  const [bKey, setBKey] = useState(initialB ?? "");
  const [mode, setMode] = useState<CompareMode>(initialMode ?? (initialB ? "side-by-side" : "single"));
  // The gather asked for: its id and source position, so another source can pair with it.
  const [wanted, setWanted] = useState<{ id: string; sourceX?: number } | null>(null);
  const [settings, setSettings] = useState<DisplaySettings>({ mode: "both", gain: 1.5, clip: 1.5, scaling: "trace", spacing: "even" });
  const [lineKeys, setLineKeys] = useState<string[]>(() => lineSources.map((l) => l.key));
  const [flipShowsB, setFlipShowsB] = useState(false);

  const a = sources.find((s) => s.key === aKey);
  const b = mode === "single" ? undefined : sources.find((s) => s.key === bKey);
  const outline = useQuery({ ...artifactQueries.outline(a?.hash ?? ""), enabled: Boolean(a) });
  const gatherList = outline.data && outline.data.kind === "gathers" && "gathers" in outline.data ? outline.data.gathers : [];
  const entries = (list: typeof gatherList) => list.map((g) => ({ id: g.id, sourceX: g.sourceX ?? undefined }));
  // Never ask a source for a gather it does not hold: pair by id, then by source position.
  const pairA = pairGather(entries(gatherList), wanted);
  const gid = pairA.id;
  const sourceXA = gatherList.find((g) => g.id === gid)?.sourceX ?? undefined;

  // The second source may name its gathers differently (e.g. one per blow before the stack).
  const outlineB = useQuery({ ...artifactQueries.outline(b?.hash ?? ""), enabled: Boolean(b) });
  const listB = outlineB.data && outlineB.data.kind === "gathers" && "gathers" in outlineB.data ? outlineB.data.gathers : [];
  const pairB = pairGather(entries(listB), gid ? { id: gid, sourceX: sourceXA } : null);
  const gidB = pairB.id;

  const ta = useQuery({ ...artifactQueries.traces(a?.hash ?? "", gid), enabled: Boolean(a && gid) });
  const tb = useQuery({ ...artifactQueries.traces(b?.hash ?? "", gidB), enabled: Boolean(b && gidB) });
  const ga = useMemo(() => (ta.data ? toView(ta.data.header, ta.data.payload) : null), [ta.data]);
  const gb = useMemo(() => (tb.data ? toView(tb.data.header, tb.data.payload) : null), [tb.data]);
  const mismatch = ga && gb && (ga.traces !== gb.traces || ga.samples !== gb.samples);
  const diff = useMemo(() => {
    if (mode !== "difference" || !ga || !gb || mismatch) return null;
    if (misfit) {
      const p = misfitPanels(ga, gb, misfit);
      return { a: p.observed, b: p.synthetic, d: p.residual, reference: p.reference, note: p.note, title: "observed − synthetic (misfit scale)" };
    }
    const d = new Float32Array(ga.data.length);
    for (let i = 0; i < d.length; i++) d[i] = ga.data[i] - gb.data[i];
    return { a: ga, b: gb, d: { ...ga, data: d }, reference: peaks(ga).gather || 1, note: "The difference is drawn on the first gather's scale (its largest amplitude).", title: "first − second (on the first's scale)" };
  }, [mode, ga, gb, mismatch, misfit]);

  // The zoom belongs to one gather and spacing: another gather or spacing starts from the whole gather.
  const [viewState, setViewState] = useState<{ key: string; view: ViewWindow } | null>(null);
  const viewKey = `${aKey}|${gid}|${ga?.traces}|${ga?.samples}|${ga?.dtS}|${settings.spacing}`;
  const view = ga ? (viewState && viewState.key === viewKey ? viewState.view : fullWindow(ga, settings)) : null;
  const setView = (v: ViewWindow) => setViewState({ key: viewKey, view: v });

  const activeLines = lineSources.filter((l) => lineKeys.includes(l.key));
  const l0 = useQuery({ ...artifactQueries.lines(activeLines[0]?.hash ?? "", gid), enabled: Boolean(activeLines[0] && gid) });
  const l1 = useQuery({ ...artifactQueries.lines(activeLines[1]?.hash ?? "", gid), enabled: Boolean(activeLines[1] && gid) });
  const overlays = useMemo<Overlays>(() => {
    const o: Overlays = {};
    for (const q of [l0.data, l1.data]) {
      if (!q) continue;
      if (q.kind === "picks") o.picks = q.picks;
      else o.mutes = q.lines;
    }
    return o;
  }, [l0.data, l1.data]);

  const set = <K extends keyof DisplaySettings>(k: K, v: DisplaySettings[K]) => setSettings((s) => ({ ...s, [k]: v }));
  const error = outline.error ?? outlineB.error ?? ta.error ?? tb.error;
  const drawn = mode === "overlay" ? { ...settings, mode: "wiggle" as const } : settings;
  const pairNote =
    b && gidB && gidB !== gid
      ? pairB.reason === "same source position"
        ? `The second source has no gather ${gid}; showing its gather ${gidB} at the same source position.`
        : `The second source has no gather ${gid} nor one at its source position; showing its gather ${gidB} (${pairB.reason}).`
      : null;

  return (
    <div className="space-y-3" data-testid="gather-viewer">
      <div className="flex flex-wrap items-end gap-3 text-sm">
        <label className="label">Gathers from
          <select className="field mt-1 w-auto" value={aKey} onChange={(e) => setAKey(e.target.value)} data-testid="source-a">
            {sources.map((s) => <option key={s.key} value={s.key}>{s.label}</option>)}
          </select>
        </label>
        <label className="label">Compare
          <select className="field mt-1 w-auto" value={mode} onChange={(e) => setMode(e.target.value as CompareMode)} data-testid="compare-mode">
            {(Object.keys(MODE_LABELS) as CompareMode[]).map((m) => <option key={m} value={m}>{MODE_LABELS[m]}</option>)}
          </select>
        </label>
        {mode !== "single" ? (
          <label className="label">against
            <select className="field mt-1 w-auto" value={bKey} onChange={(e) => setBKey(e.target.value)} data-testid="source-b">
              <option value="">choose…</option>
              {sources.filter((s) => s.key !== aKey).map((s) => <option key={s.key} value={s.key}>{s.label}</option>)}
            </select>
          </label>
        ) : null}
        <label className="label">Gather
          <select
            className="field mt-1 w-auto"
            value={gid}
            onChange={(e) => {
              const g = gatherList.find((x) => x.id === e.target.value);
              setWanted({ id: e.target.value, sourceX: g?.sourceX ?? undefined });
            }}
            data-testid="gather-id"
          >
            {gatherList.map((g) => <option key={g.id} value={g.id}>{g.id} ({g.traceCount} traces{g.sourceX !== undefined && g.sourceX !== null ? `, source at ${Math.round(g.sourceX * 100) / 100} m` : ""})</option>)}
          </select>
        </label>
      </div>

      <fieldset className="flex flex-wrap items-end gap-x-5 gap-y-2 rounded-md border border-line bg-ground/50 px-3 py-2 text-xs">
        <legend className="sr-only">Display</legend>
        {mode === "overlay" ? (
          <span className="label">Drawn as wiggles (two colours)</span>
        ) : (
          <label className="label">Draw as
            <select className="field mt-1 w-auto py-1 text-xs" value={settings.mode} onChange={(e) => set("mode", e.target.value as DisplaySettings["mode"])} data-testid="draw-as">
              <option value="both">Wiggles on density</option>
              <option value="wiggle">Wiggles, positive filled</option>
              <option value="density">Density image</option>
            </select>
          </label>
        )}
        <label className="label">Gain ×{settings.gain.toFixed(1)}
          <input type="range" min={0.2} max={10} step={0.1} value={settings.gain} onChange={(e) => set("gain", Number(e.target.value))} className="mt-1 block w-32" aria-label="Gain" />
        </label>
        <label className="label">Clip at {settings.clip.toFixed(1)} trace spacings
          <input type="range" min={0.5} max={5} step={0.1} value={settings.clip} onChange={(e) => set("clip", Number(e.target.value))} className="mt-1 block w-32" aria-label="Clip" />
        </label>
        {diff ? (
          <span className="label">Scale: one for all panels</span>
        ) : (
          <label className="label">Scale to
            <select className="field mt-1 w-auto py-1 text-xs" value={settings.scaling} onChange={(e) => set("scaling", e.target.value as DisplaySettings["scaling"])}>
              <option value="trace">each trace&apos;s peak</option>
              <option value="gather">the gather&apos;s peak</option>
            </select>
          </label>
        )}
        <label className="label">Trace spacing
          <select className="field mt-1 w-auto py-1 text-xs" value={settings.spacing} onChange={(e) => set("spacing", e.target.value as DisplaySettings["spacing"])}>
            <option value="even">even</option>
            <option value="offset">true offset</option>
          </select>
        </label>
        {lineSources.length ? (
          <div className="flex items-center gap-3">
            {lineSources.map((l) => (
              <label key={l.key} className="flex items-center gap-1 text-ink-soft">
                <input type="checkbox" checked={lineKeys.includes(l.key)} onChange={(e) => setLineKeys((ks) => (e.target.checked ? [...ks, l.key] : ks.filter((k) => k !== l.key)))} />
                {l.label}
              </label>
            ))}
          </div>
        ) : null}
        <button type="button" className="btn py-1 text-xs" onClick={() => ga && setView(fullWindow(ga, settings))}>Show whole gather</button>
        <span className="muted">Wheel: zoom time · Shift+wheel: zoom offset · drag: pan</span>
      </fieldset>

      {error ? <p role="alert" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad">{error.message}</p> : null}
      {mismatch && mode === "difference" ? <p role="alert" className="rounded-md bg-warn-soft px-3 py-2 text-sm text-warn" data-testid="size-mismatch">The two gathers differ in size ({ga.traces}×{ga.samples} against {gb.traces}×{gb.samples}); the difference cannot be drawn.</p> : null}
      {mode !== "single" && !b ? <p className="text-sm muted">Choose a second source to compare against.</p> : null}
      {pairNote ? <p className="text-xs muted" data-testid="pair-note">{pairNote}</p> : null}
      {!ga || !view ? (
        <div className="flex h-64 items-center justify-center rounded-md border border-dashed border-line text-sm muted">{ta.isLoading || outline.isLoading ? "Loading traces…" : "No gather to show."}</div>
      ) : mode === "single" || !gb ? (
        <TraceCanvas gather={ga} settings={settings} view={view} onViewChange={setView} overlays={overlays} title={`${a?.label} · ${gid}`} testId="trace-canvas-a" />
      ) : mode === "flip" ? (
        <div>
          <div className="mb-2 flex items-center gap-2">
            <button type="button" className="btn-primary" onClick={() => setFlipShowsB((v) => !v)} data-testid="flip-button">Flip (showing {flipShowsB ? "second" : "first"})</button>
            <span className="text-xs muted">{flipShowsB ? b?.label : a?.label}</span>
          </div>
          <TraceCanvas gather={flipShowsB ? gb : ga} settings={settings} view={view} onViewChange={setView} overlays={overlays} title={`${flipShowsB ? b?.label : a?.label} · ${flipShowsB ? gidB : gid}`} testId="trace-canvas-flip" />
        </div>
      ) : mode === "overlay" ? (
        <div>
          <p className="mb-1 text-xs"><span className="font-medium text-ink">■ {a?.label}</span> · <span className="font-medium" style={{ color: "#d0611b" }}>■ {b?.label}</span></p>
          <TraceCanvas gather={ga} second={gb} settings={drawn} view={view} onViewChange={setView} overlays={overlays} title={`${gid} overlaid`} testId="trace-canvas-overlay" />
        </div>
      ) : diff ? (
        <div className="space-y-2">
          <p className="text-xs text-ink-soft" data-testid="difference-note">{diff.note}</p>
          <div className="grid gap-3 lg:grid-cols-2 xl:grid-cols-3">
            <TraceCanvas gather={diff.a} settings={{ ...settings, referenceAmplitude: diff.reference }} view={view} onViewChange={setView} overlays={overlays} title={`${a?.label} · ${gid}`} height={480} testId="trace-canvas-a" />
            <TraceCanvas gather={diff.b} settings={{ ...settings, referenceAmplitude: diff.reference }} view={view} onViewChange={setView} overlays={overlays} title={`${b?.label} · ${gidB}`} height={480} testId="trace-canvas-b" />
            <TraceCanvas gather={diff.d} settings={{ ...settings, referenceAmplitude: diff.reference }} view={view} onViewChange={setView} title={diff.title} height={480} testId="trace-canvas-diff" />
          </div>
        </div>
      ) : (
        <div className="grid gap-3 lg:grid-cols-2">
          <TraceCanvas gather={ga} settings={settings} view={view} onViewChange={setView} overlays={overlays} title={`${a?.label} · ${gid}`} height={480} testId="trace-canvas-a" />
          <TraceCanvas gather={gb} settings={settings} view={view} onViewChange={setView} overlays={overlays} title={`${b?.label} · ${gidB}`} height={480} testId="trace-canvas-b" />
        </div>
      )}
      {ga ? <AmplitudeKey settings={drawn} reference={diff ? "common" : settings.scaling} /> : null}
      {ta.data && ta.data.header.decimation > 1 ? <p className="text-xs muted">Shown decimated ×{ta.data.header.decimation} in time (peaks kept).</p> : null}
    </div>
  );
}
