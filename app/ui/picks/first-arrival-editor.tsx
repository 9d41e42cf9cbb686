"use client";

import { useMemo, useState } from "react";
import { useRouter } from "next/navigation";
import { useQuery } from "@tanstack/react-query";
import { ApiError, artifactQueries, postJson } from "@/app/lib/queries";
import { formatNumber } from "@/app/ui/format";
import { fullWindow, type DisplaySettings, type GatherView, type ViewWindow } from "@/app/ui/traces/draw-traces";
import { TraceCanvas } from "@/app/ui/traces/trace-canvas";
import { clickEdit, mergePickEdits, picksWithPending, withPendingEdit, type PickEditEntry } from "./pick-edit-list";

const ACTION_WORDS: Record<PickEditEntry["action"], string> = { moved: "moved", added: "added", deleted: "deleted" };

/**
 * Editing first-arrival picks by hand: one gather of the step's input with its picks over the
 * traces (automatic picks as crosses, hand picks as green squares, pending edits as purple
 * squares). A click on a trace puts its pick at the clicked time (a move, or an addition where
 * there is no pick); Delete removes the chosen trace's pick. The pending edits are listed; "Save
 * as a new run" reruns from this step with the edits merged into its `pickEdits` setting, so the
 * picks and everything after them are recomputed and the audit trail records who changed what.
 */
export function FirstArrivalEditor({
  runId,
  label,
  gathersHash,
  picksHash,
  savedEdits,
}: {
  runId: number;
  label: string;
  gathersHash: string;
  picksHash: string;
  savedEdits: PickEditEntry[];
}) {
  const router = useRouter();
  const outline = useQuery(artifactQueries.outline(gathersHash));
  const gathers = outline.data && outline.data.kind === "gathers" && "gathers" in outline.data ? outline.data.gathers : [];
  const [chosen, setChosen] = useState("");
  const gid = chosen || gathers[0]?.id || "";
  const traces = useQuery({ ...artifactQueries.traces(gathersHash, gid), enabled: Boolean(gid) });
  const lines = useQuery({ ...artifactQueries.lines(picksHash, gid), enabled: Boolean(gid) });
  const [settings, setSettings] = useState<DisplaySettings>({ mode: "wiggle", gain: 1.5, clip: 1.5, scaling: "trace", spacing: "even" });
  const [pending, setPending] = useState<PickEditEntry[]>([]);
  const [selected, setSelected] = useState<number | null>(null);
  const [saving, setSaving] = useState(false);
  const [error, setError] = useState<string | null>(null);

  const header = traces.data?.header;
  const gather = useMemo<GatherView | null>(
    () =>
      traces.data
        ? { data: traces.data.payload, traces: traces.data.header.traceCount, samples: traces.data.header.sampleCount, dtS: traces.data.header.sampleIntervalS, t0S: traces.data.header.startTimeS, offsetsM: traces.data.header.offsetsM, dead: traces.data.header.dead }
        : null,
    [traces.data],
  );
  const channels = useMemo(() => header?.channels ?? [], [header]);
  const artifactPicks = useMemo(() => (lines.data && lines.data.kind === "picks" ? lines.data.picks : []), [lines.data]);
  const shown = useMemo(() => picksWithPending(artifactPicks, channels, gid, pending), [artifactPicks, channels, gid, pending]);

  // The first view reaches a little past the latest pick: first arrivals sit early in the record.
  const [viewState, setViewState] = useState<{ key: string; view: ViewWindow } | null>(null);
  const viewKey = `${gid}|${settings.spacing}|${gather?.samples}`;
  const view = useMemo(() => {
    if (!gather) return null;
    if (viewState && viewState.key === viewKey) return viewState.view;
    const full = fullWindow(gather, settings);
    const latest = Math.max(0, ...artifactPicks.map((p) => p.timeS));
    return latest > 0 ? { ...full, tMaxS: Math.min(full.tMaxS, Math.max(full.tMinS + 0.05, 1.6 * latest + 0.02)) } : full;
  }, [gather, viewState, viewKey, settings, artifactPicks]);

  const pickOf = (t: number) => shown.find((p) => p.traceIndex === t);
  const selectedChannel = selected !== null ? channels[selected] : undefined;

  function setPick(p: { traceIndex: number; timeS: number }) {
    if (!gather || gather.dead?.[p.traceIndex]) {
      setError(gather ? `Channel ${channels[p.traceIndex]} is a dead trace: it takes no pick.` : null);
      return;
    }
    setError(null);
    setSelected(p.traceIndex);
    // Move or add, as the artifact holds the trace: the step counts by what it finds anyway.
    const picked = artifactPicks.some((q) => q.traceIndex === p.traceIndex);
    setPending((list) => withPendingEdit(list, clickEdit(gid, channels[p.traceIndex], p.timeS * 1000, picked)));
  }

  function deleteSelected() {
    if (selected === null || !pickOf(selected)) return;
    setPending((list) => withPendingEdit(list, { gather: gid, channel: channels[selected], action: "deleted", timeMs: null }));
  }

  async function save() {
    setSaving(true);
    setError(null);
    try {
      const pickEdits = mergePickEdits(savedEdits, pending);
      const res = await postJson<{ runId: number }>(`/api/runs/${runId}/rerun`, { fromLabel: label, overrides: { [label]: { pickEdits } } });
      router.push(`/runs/${res.runId}`);
    } catch (err) {
      setError(err instanceof ApiError || err instanceof Error ? err.message : String(err));
      setSaving(false);
    }
  }

  const set = <K extends keyof DisplaySettings>(k: K, v: DisplaySettings[K]) => setSettings((s) => ({ ...s, [k]: v }));
  const offsetOf = (e: PickEditEntry) => (e.gather === gid ? header?.offsetsM[channels.indexOf(e.channel)] : undefined);

  return (
    <div
      className="space-y-4 outline-none"
      tabIndex={0}
      onKeyDown={(e) => {
        if (e.key === "Delete" || e.key === "Backspace") {
          e.preventDefault();
          deleteSelected();
        } else if (e.key === "Escape") setSelected(null);
      }}
      data-testid="pick-editor"
    >
      <div className="card space-y-3 p-4">
        <div className="flex flex-wrap items-end gap-3 text-sm">
          <label className="label">Shot record
            <select className="field mt-1 w-auto" value={gid} onChange={(e) => { setChosen(e.target.value); setSelected(null); }} data-testid="pick-editor-gather">
              {gathers.map((g) => <option key={g.id} value={g.id}>{g.id} ({g.traceCount} traces{g.sourceX !== null && g.sourceX !== undefined ? `, source at ${Math.round(g.sourceX * 100) / 100} m` : ""})</option>)}
            </select>
          </label>
          <label className="label">Draw as
            <select className="field mt-1 w-auto" value={settings.mode} onChange={(e) => set("mode", e.target.value as DisplaySettings["mode"])}>
              <option value="wiggle">Wiggles, positive filled</option>
              <option value="both">Wiggles on density</option>
              <option value="density">Density image</option>
            </select>
          </label>
          <label className="label">Gain ×{settings.gain.toFixed(1)}
            <input type="range" min={0.2} max={10} step={0.1} value={settings.gain} onChange={(e) => set("gain", Number(e.target.value))} className="mt-1 block w-32" aria-label="Gain" />
          </label>
          <button type="button" className="btn" onClick={() => gather && setViewState({ key: viewKey, view: fullWindow(gather, settings) })}>Show whole record</button>
        </div>
        <p className="text-xs muted">
          Click a trace to put its pick at that time · Delete (or the button) removes the chosen trace&apos;s pick · wheel: zoom time · drag: pan.{" "}
          <span className="whitespace-nowrap"><span className="font-semibold" style={{ color: "#d0611b" }}>+</span> automatic pick</span> ·{" "}
          <span className="whitespace-nowrap"><span className="font-semibold" style={{ color: "#b23a2e" }}>+</span> flagged off the trend</span> ·{" "}
          <span className="whitespace-nowrap"><span className="font-semibold" style={{ color: "#2f7a4f" }}>□</span> saved hand pick</span> ·{" "}
          <span className="whitespace-nowrap"><span className="font-semibold" style={{ color: "#7b3fa0" }}>□</span> pending edit</span>
        </p>
        {outline.error || traces.error || lines.error ? (
          <p role="alert" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad">{(outline.error ?? traces.error ?? lines.error)!.message}</p>
        ) : null}
        {gather && view ? (
          <TraceCanvas
            gather={gather}
            settings={settings}
            view={view}
            onViewChange={(v) => setViewState({ key: viewKey, view: v })}
            overlays={{ picks: shown, selectedTrace: selected ?? undefined }}
            title={`${gid} · picks over the input of ${label}`}
            testId="pick-editor-canvas"
            onPointAt={setPick}
          />
        ) : (
          <div className="flex h-64 items-center justify-center rounded-md border border-dashed border-line text-sm muted">{traces.isLoading || outline.isLoading ? "Loading traces…" : "No gather to show."}</div>
        )}
        <div className="flex flex-wrap items-center gap-3 text-sm">
          {selected !== null ? (
            <span data-testid="pick-editor-selected">
              Channel {selectedChannel} ({formatNumber(header?.offsetsM[selected] ?? NaN, "m", 3)} offset):{" "}
              {pickOf(selected) ? `pick at ${formatNumber(pickOf(selected)!.timeS * 1000, "ms", 4)}` : "no pick"}
            </span>
          ) : (
            <span className="muted">No trace chosen.</span>
          )}
          <button type="button" className="btn" disabled={selected === null || !pickOf(selected)} onClick={deleteSelected} data-testid="pick-editor-delete">
            Delete this pick
          </button>
        </div>
      </div>

      <div className="grid gap-4 lg:grid-cols-2">
        <section className="card p-4" aria-label="Pending edits">
          <h2 className="mb-2 text-base">Pending edits ({pending.length})</h2>
          {pending.length === 0 ? (
            <p className="text-sm muted">None yet. Click a trace to move or add its pick.</p>
          ) : (
            <table className="w-full text-sm" data-testid="pending-edits">
              <thead>
                <tr className="text-left text-xs text-ink-soft"><th className="py-1">Shot</th><th>Channel</th><th>Offset</th><th>Edit</th><th className="text-right">Time</th><th /></tr>
              </thead>
              <tbody>
                {pending.map((e) => (
                  <tr key={`${e.gather}-${e.channel}`} className="border-t border-line" data-testid="pending-edit">
                    <td className="py-1">{e.gather}</td>
                    <td className="tabular-nums">{e.channel}</td>
                    <td className="tabular-nums">{offsetOf(e) !== undefined ? formatNumber(offsetOf(e)!, "m", 3) : "—"}</td>
                    <td>{ACTION_WORDS[e.action]}</td>
                    <td className="text-right tabular-nums">{e.timeMs !== null ? formatNumber(e.timeMs, "ms", 4) : "—"}</td>
                    <td className="text-right">
                      <button type="button" className="text-xs text-accent hover:underline" onClick={() => setPending((list) => list.filter((x) => x !== e))}>undo</button>
                    </td>
                  </tr>
                ))}
              </tbody>
            </table>
          )}
          <div className="mt-3 flex flex-wrap items-center gap-3">
            <button type="button" className="btn-primary" disabled={pending.length === 0 || saving} onClick={save} data-testid="save-pick-edits">
              {saving ? "Starting the run…" : "Save as a new run"}
            </button>
            <span className="text-xs muted">Reruns from {label} with the edits in its settings; earlier steps come from the cache.</span>
          </div>
          {error ? <p role="alert" className="mt-2 rounded-md bg-bad-soft px-3 py-2 text-sm text-bad" data-testid="pick-editor-error">{error}</p> : null}
        </section>
        <section className="card p-4" aria-label="Saved edits">
          <h2 className="mb-2 text-base">Edits already in this run ({savedEdits.length})</h2>
          {savedEdits.length === 0 ? (
            <p className="text-sm muted">This run&apos;s picks are all automatic.</p>
          ) : (
            <ul className="max-h-64 space-y-0.5 overflow-auto text-xs tabular-nums" data-testid="saved-edits">
              {savedEdits.map((e, i) => (
                <li key={i}>{e.gather} channel {e.channel}: {ACTION_WORDS[e.action]}{e.timeMs !== null ? ` to ${formatNumber(e.timeMs, "ms", 4)}` : ""}</li>
              ))}
            </ul>
          )}
          <p className="mt-2 text-xs muted">They stay in the new run unless you edit the same trace again.</p>
        </section>
      </div>
    </div>
  );
}
