"use client";

import { useEffect, useMemo, useRef, useState } from "react";
import { useRouter } from "next/navigation";
import { useQuery } from "@tanstack/react-query";
import { artifactQueries, postJson } from "@/app/lib/queries";
import { formatNumber } from "@/app/ui/format";
import { niceTicks, tickLabel } from "@/app/ui/charts/ticks";
import { gridToCanvas, lutCss, SEQUENTIAL } from "@/app/ui/model/colour-maps";
import { addPoint, curveOf, deletePoint, movePoint, thinCurve, withCurve, type CurvePoint, type HandPickEntry } from "./dispersion-points";
import { useElementWidth } from "@/app/ui/use-element-width";

const M = { left: 62, right: 16, top: 12, bottom: 42 };
const H = 440;
const MODES = [0, 1, 2];
const HAND = "#2f7a4f";
const MODE_WORDS = (m: number) => (m === 0 ? "fundamental mode (0)" : `higher mode ${m}`);

const roundPoint = (f: number, c: number): CurvePoint => [Math.round(f * 100) / 100, Math.round(c * 10) / 10];

/**
 * Editing dispersion picks by hand on the dispersion image (phase velocity up, frequency across),
 * per window and mode: a click on the image adds a point, dragging a point moves it, a chosen
 * point is removed with Delete (or the button). The automatic pick of the fundamental mode and a
 * window's modelled curve are drawn for reference. "Save as a new run" reruns from the
 * dispersion-image step with the curves in its `handPicks` setting (the inversion uses a window's
 * hand pick of mode 0 instead of the automatic one).
 */
export function DispersionEditor({
  runId,
  label,
  dispersionHash,
  savedHandPicks,
  frequencyStepHz,
  canEdit,
}: {
  runId: number;
  label: string;
  dispersionHash: string;
  savedHandPicks: HandPickEntry[];
  frequencyStepHz: number;
  /** False for roles that may not rerun: the image and the picks only, no editing. */
  canEdit: boolean;
}) {
  const router = useRouter();
  const [windowId, setWindowId] = useState<string | undefined>(undefined);
  const data = useQuery(artifactQueries.dispersion(dispersionHash, windowId));
  const [mode, setMode] = useState(0);
  const [handPicks, setHandPicks] = useState<HandPickEntry[]>(savedHandPicks);
  const [selected, setSelected] = useState<number | null>(null);
  const [drag, setDrag] = useState<{ index: number; x: number; y: number; at: CurvePoint; moved: boolean } | null>(null);
  const [saving, setSaving] = useState(false);
  const [error, setError] = useState<string | null>(null);
  const [wrap, width] = useElementWidth();
  const canvas = useRef<HTMLCanvasElement>(null);

  const d = data.data;
  const win = d?.window.id ?? windowId ?? "";
  const f0 = d?.frequenciesHz[0] ?? 0;
  const f1 = d?.frequenciesHz.at(-1) ?? 1;
  const v0 = d?.velocitiesMps[0] ?? 0;
  const v1 = d?.velocitiesMps.at(-1) ?? 1;
  const pw = Math.max(50, width - M.left - M.right);
  const ph = H - M.top - M.bottom;
  const px = (f: number) => M.left + ((f - f0) / (f1 - f0 || 1)) * pw;
  const py = (v: number) => M.top + ph - ((v - v0) / (v1 - v0 || 1)) * ph;
  const at = (x: number, y: number): CurvePoint => {
    const f = f0 + ((x - M.left) / pw) * (f1 - f0);
    const v = v0 + ((M.top + ph - y) / ph) * (v1 - v0);
    return roundPoint(Math.min(f1, Math.max(f0, f)), Math.min(v1, Math.max(v0, v)));
  };

  // The image: rows of velocity (highest at the top), columns of frequency.
  useEffect(() => {
    const c = canvas.current;
    if (!c || !d || width === 0) return;
    const nf = d.frequenciesHz.length;
    const nv = d.velocitiesMps.length;
    const grid = new Float32Array(nf * nv);
    for (let i = 0; i < nf; i++) for (let j = 0; j < nv; j++) grid[(nv - 1 - j) * nf + i] = d.window.image[i * nv + j];
    const off = gridToCanvas(grid, nf, nv, 0, 1, SEQUENTIAL);
    const dpr = Math.min(2, window.devicePixelRatio || 1);
    c.width = Math.round(pw * dpr);
    c.height = Math.round(ph * dpr);
    const ctx = c.getContext("2d");
    if (!ctx) return;
    ctx.imageSmoothingEnabled = true;
    ctx.drawImage(off, 0, 0, c.width, c.height);
  }, [d, width, pw, ph]);

  const points = curveOf(handPicks, win, mode);
  const shownPoints = drag?.moved ? movePoint(points, drag.index, drag.at, 0) : points;
  const automatic = d?.window.picks.find((c) => c.origin === "automatic" && c.mode === 0);
  const otherHand = handPicks.filter((h) => h.window === win && h.mode !== mode);
  const changed = useMemo(() => {
    const key = (h: HandPickEntry) => `${h.window}/${h.mode}`;
    const keys = new Set([...savedHandPicks, ...handPicks].map(key));
    return [...keys].filter((k) => JSON.stringify(savedHandPicks.find((h) => key(h) === k)?.points ?? []) !== JSON.stringify(handPicks.find((h) => key(h) === k)?.points ?? [])).sort();
  }, [savedHandPicks, handPicks]);

  const setPoints = (next: CurvePoint[]) => setHandPicks((h) => withCurve(h, win, mode, next));
  const local = (e: React.PointerEvent<SVGElement>) => {
    const r = (e.currentTarget.ownerSVGElement ?? e.currentTarget).getBoundingClientRect();
    return { x: e.clientX - r.left, y: e.clientY - r.top };
  };

  function onBackgroundDown(e: React.PointerEvent<SVGRectElement>) {
    const { x, y } = local(e);
    const p = at(x, y);
    const next = addPoint(points, p, frequencyStepHz);
    setPoints(next);
    setSelected(next.findIndex((q) => q[0] === p[0] && q[1] === p[1]));
    setError(null);
  }
  function onPointDown(e: React.PointerEvent<SVGElement>, index: number) {
    e.stopPropagation();
    (e.currentTarget.ownerSVGElement as SVGSVGElement).setPointerCapture(e.pointerId);
    const { x, y } = local(e);
    setSelected(index);
    setDrag({ index, x, y, at: points[index], moved: false });
  }
  function onMove(e: React.PointerEvent<SVGSVGElement>) {
    if (!drag) return;
    const r = e.currentTarget.getBoundingClientRect();
    const x = e.clientX - r.left;
    const y = e.clientY - r.top;
    const moved = drag.moved || Math.hypot(x - drag.x, y - drag.y) >= 3;
    setDrag({ ...drag, at: at(x, y), moved });
  }
  function onUp() {
    if (drag?.moved) {
      const next = movePoint(points, drag.index, drag.at, frequencyStepHz);
      setPoints(next);
      setSelected(next.findIndex((q) => q[0] === drag.at[0] && q[1] === drag.at[1]));
    }
    setDrag(null);
  }
  function deleteSelected() {
    if (selected === null || selected >= points.length) return;
    setPoints(deletePoint(points, selected));
    setSelected(null);
  }
  async function save() {
    setSaving(true);
    setError(null);
    try {
      const res = await postJson<{ runId: number }>(`/api/runs/${runId}/rerun`, { fromLabel: label, overrides: { [label]: { handPicks } } });
      router.push(`/runs/${res.runId}`);
    } catch (err) {
      setError(err instanceof Error ? err.message : String(err));
      setSaving(false);
    }
  }

  const line = (pts: Array<[number, number]>) => pts.map((p) => `${px(p[0])},${py(p[1])}`).join(" ");

  return (
    <div
      className="space-y-4 outline-none"
      tabIndex={0}
      onKeyDown={(e) => {
        if (canEdit && (e.key === "Delete" || e.key === "Backspace")) {
          e.preventDefault();
          deleteSelected();
        } else if (e.key === "Escape") setSelected(null);
      }}
      data-testid="dispersion-editor"
    >
      <div className="card space-y-3 p-4">
        <div className="flex flex-wrap items-end gap-3 text-sm">
          <label className="label">Window of receivers
            <select className="field mt-1 w-auto" value={win} onChange={(e) => { setWindowId(e.target.value); setSelected(null); }} data-testid="dispersion-window">
              {(d?.windows ?? []).map((w) => <option key={w.id} value={w.id}>{w.id} ({formatNumber(w.receiverX0, "m", 3)} to {formatNumber(w.receiverX1, "m", 3)})</option>)}
            </select>
          </label>
          <label className="label">Mode
            <select className="field mt-1 w-auto" value={mode} onChange={(e) => { setMode(Number(e.target.value)); setSelected(null); }} data-testid="dispersion-mode">
              {MODES.map((m) => <option key={m} value={m}>{MODE_WORDS(m)}</option>)}
            </select>
          </label>
          {canEdit ? (
          <>
          <button
            type="button"
            className="btn"
            disabled={!automatic || automatic.points.length === 0}
            onClick={() => automatic && setPoints(thinCurve(automatic.points.map((p) => roundPoint(p[0], p[1])), 16))}
            data-testid="dispersion-from-automatic"
          >
            Start from the automatic pick
          </button>
          <button type="button" className="btn" disabled={points.length === 0} onClick={() => { setPoints([]); setSelected(null); }}>Clear this curve</button>
          <button type="button" className="btn" disabled={selected === null} onClick={deleteSelected} data-testid="dispersion-delete-point">Delete point</button>
          </>
          ) : null}
        </div>
        <p className="text-xs muted">
          {canEdit
            ? "Click the image to add a point · drag a point to move it · choose a point and press Delete to remove it. One velocity per frequency: a point close in frequency to another replaces it."
            : "Hand picks are made by processors and leads; your role may look at them."}
        </p>
        {data.error ? <p role="alert" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad">{data.error.message}</p> : null}
        <div ref={wrap} className="relative w-full select-none" style={{ height: H }}>
          {d && width > 0 ? (
            <>
              <canvas ref={canvas} className="absolute" style={{ left: M.left, top: M.top, width: pw, height: ph }} aria-hidden />
              <svg
                width={width}
                height={H}
                className="absolute left-0 top-0"
                role="img"
                aria-label={`Dispersion image of window ${win}: phase velocity against frequency, with picks`}
                onPointerMove={onMove}
                onPointerUp={onUp}
                data-testid="dispersion-chart"
                style={{ touchAction: "none" }}
              >
                {niceTicks(v0, v1, 6).map((t) => (
                  <g key={`v${t}`}>
                    <line x1={M.left - 4} x2={M.left} y1={py(t)} y2={py(t)} stroke="#4a5559" />
                    <text x={M.left - 7} y={py(t)} textAnchor="end" dominantBaseline="middle" fontSize={10} fill="#4a5559">{tickLabel(t)}</text>
                  </g>
                ))}
                {niceTicks(f0, f1, 8).map((t) => (
                  <g key={`f${t}`}>
                    <line x1={px(t)} x2={px(t)} y1={M.top + ph} y2={M.top + ph + 4} stroke="#4a5559" />
                    <text x={px(t)} y={M.top + ph + 15} textAnchor="middle" fontSize={10} fill="#4a5559">{tickLabel(t)}</text>
                  </g>
                ))}
                <text x={M.left + pw / 2} y={H - 6} textAnchor="middle" fontSize={11} fill="#4a5559">Frequency (Hz)</text>
                <text transform={`translate(14 ${M.top + ph / 2}) rotate(-90)`} textAnchor="middle" fontSize={11} fill="#4a5559">Phase velocity (m/s)</text>
                <rect x={M.left} y={M.top} width={pw} height={ph} fill="transparent" stroke="#4a5559" onPointerDown={canEdit ? onBackgroundDown : undefined} style={{ cursor: canEdit ? "crosshair" : "default" }} data-testid="dispersion-image" />
                {automatic && automatic.points.length > 1 ? (
                  <g pointerEvents="none">
                    <polyline points={line(automatic.points)} fill="none" stroke="#ffffff" strokeWidth={1.2} strokeDasharray="4 3" />
                    {automatic.points.map((p, i) => <circle key={i} cx={px(p[0])} cy={py(p[1])} r={1.6} fill="#ffffff" />)}
                  </g>
                ) : null}
                {d.window.modelled && d.window.modelled.points.length > 1 ? (
                  <polyline points={line(d.window.modelled.points)} fill="none" stroke="#d0611b" strokeWidth={1.5} strokeDasharray="7 3" pointerEvents="none" />
                ) : null}
                {otherHand.map((h) => (
                  <polyline key={h.mode} points={line(h.points)} fill="none" stroke={HAND} strokeWidth={1} strokeDasharray="2 2" pointerEvents="none" />
                ))}
                {shownPoints.length > 1 ? <polyline points={line(shownPoints)} fill="none" stroke="#ffffff" strokeWidth={3} pointerEvents="none" /> : null}
                {shownPoints.length > 1 ? <polyline points={line(shownPoints)} fill="none" stroke={HAND} strokeWidth={1.6} pointerEvents="none" /> : null}
                {shownPoints.map((p, i) => (
                  <rect
                    key={`${p[0]}-${i}`}
                    x={px(p[0]) - 5}
                    y={py(p[1]) - 5}
                    width={10}
                    height={10}
                    fill={i === (drag?.moved ? -1 : selected) ? "#7b3fa0" : HAND}
                    stroke="#ffffff"
                    strokeWidth={1.5}
                    onPointerDown={canEdit ? (e) => onPointDown(e, i) : undefined}
                    style={{ cursor: canEdit ? "move" : "default" }}
                    data-testid="dispersion-point"
                  >
                    <title>{`${formatNumber(p[0], "Hz", 4)}, ${formatNumber(p[1], "m/s", 4)}`}</title>
                  </rect>
                ))}
              </svg>
            </>
          ) : (
            <div className="flex h-full items-center justify-center rounded-md border border-dashed border-line text-sm muted">{data.isLoading ? "Loading the dispersion image…" : "No image to show."}</div>
          )}
        </div>
        <ul className="flex flex-wrap gap-x-4 gap-y-1 text-[11px] text-ink-soft" aria-label="Legend">
          <li><span className="mr-1 inline-block h-2 w-8 align-middle" style={{ background: `linear-gradient(to right, ${lutCss(SEQUENTIAL, 0)}, ${lutCss(SEQUENTIAL, 128)}, ${lutCss(SEQUENTIAL, 255)})` }} />image value 0 to 1 ({d?.normalisation === "none" ? "mean coherence" : "each frequency divided by its largest value"})</li>
          <li><span className="mr-1 inline-block h-0.5 w-6 border-t border-dashed border-ink-soft align-middle" />automatic pick, mode 0</li>
          <li><span className="mr-1 inline-block h-2 w-2 align-middle" style={{ background: HAND }} />hand pick, {MODE_WORDS(mode)}</li>
          {d?.window.modelled ? <li><span className="mr-1 inline-block h-0.5 w-6 border-t-2 border-dashed align-middle" style={{ borderColor: "#d0611b" }} />modelled curve of the window&apos;s 1D result</li> : null}
        </ul>
        {d ? (
          <p className="text-xs muted">
            Window {d.window.id}: {d.window.traceCount} traces of {d.window.gatherIds.length} shot(s), |offset| {formatNumber(d.window.minOffsetM, "m", 3)} to {formatNumber(d.window.maxOffsetM, "m", 3)}. This curve: {points.length} point(s){selected !== null && points[selected] ? `; chosen ${formatNumber(points[selected][0], "Hz", 4)}, ${formatNumber(points[selected][1], "m/s", 4)}` : ""}.
          </p>
        ) : null}
      </div>

      <section className="card p-4" aria-label="Hand picks">
        <h2 className="mb-2 text-base">Hand picks in this run&apos;s settings</h2>
        {handPicks.length === 0 ? (
          <p className="text-sm muted">None: the inversion uses the automatic picks.</p>
        ) : (
          <table className="w-full text-sm" data-testid="dispersion-hand-picks">
            <thead><tr className="text-left text-xs text-ink-soft"><th className="py-1">Window</th><th>Mode</th><th>Points</th><th>Frequencies</th><th /></tr></thead>
            <tbody>
              {handPicks.map((h) => (
                <tr key={`${h.window}/${h.mode}`} className="border-t border-line">
                  <td className="py-1">{h.window}</td>
                  <td>{h.mode}</td>
                  <td className="tabular-nums">{h.points.length}</td>
                  <td className="tabular-nums">{formatNumber(h.points[0][0], "Hz", 3)} to {formatNumber(h.points[h.points.length - 1][0], "Hz", 3)}</td>
                  <td className="text-xs">{changed.includes(`${h.window}/${h.mode}`) ? <span className="rounded bg-warn px-1 text-white">changed, not saved</span> : "saved"}</td>
                </tr>
              ))}
            </tbody>
          </table>
        )}
        {changed.filter((k) => !handPicks.some((h) => `${h.window}/${h.mode}` === k)).map((k) => <p key={k} className="text-xs text-warn">{k.replace("/", ", mode ")}: removed, not saved</p>)}
        {canEdit ? (
        <div className="mt-3 flex flex-wrap items-center gap-3">
          <button type="button" className="btn-primary" disabled={changed.length === 0 || saving} onClick={save} data-testid="save-dispersion-picks">
            {saving ? "Starting the run…" : "Save as a new run"}
          </button>
          <span className="text-xs muted">Reruns from {label} with these curves in its settings; earlier steps come from the cache.</span>
        </div>
        ) : null}
        {error ? <p role="alert" className="mt-2 rounded-md bg-bad-soft px-3 py-2 text-sm text-bad" data-testid="dispersion-editor-error">{error}</p> : null}
      </section>
    </div>
  );
}
