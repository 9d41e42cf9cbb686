"use client";

import { useEffect, useRef, useState } from "react";
import Link from "next/link";
import { useQuery } from "@tanstack/react-query";
import { artifactQueries } from "@/app/lib/queries";
import { niceTicks, tickLabel } from "@/app/ui/charts/ticks";
import { formatNumber } from "@/app/ui/format";
import { DIVERGING, gridToCanvas, lutCss } from "./colour-maps";
import { useElementWidth } from "@/app/ui/use-element-width";

const M = { left: 56, right: 92, top: 30, bottom: 40 };

/** The 99th percentile of |v| over (a sample of) the frame: a clip level the source point does not dominate. */
export function clipLevel(values: Float32Array): number {
  const step = Math.max(1, Math.floor(values.length / 20000));
  const sample: number[] = [];
  for (let i = 0; i < values.length; i += step) sample.push(Math.abs(values[i]));
  sample.sort((a, b) => a - b);
  return sample[Math.min(sample.length - 1, Math.floor(0.99 * sample.length))] || 1;
}

/**
 * The wavefield snapshots of a run: choose the shot (one snapshot set per shot the modelling
 * kept), play the frames; each frame drawn with distance and depth axes in metres, a symmetric
 * colour bar, the source (star) and the receivers (triangles) on the surface.
 */
export function SnapshotPanel({ sets, positionsHash, runId }: { sets: Array<{ label: string; hash: string }>; positionsHash?: string; runId: number }) {
  const [index, setIndex] = useState(0);
  const chosen = sets[Math.min(index, sets.length - 1)];
  const outline = useQuery(artifactQueries.outline(chosen.hash));
  const o = outline.data && outline.data.kind === "snapshots" && "timesS" in outline.data ? outline.data : null;
  return (
    <div className="space-y-2" data-testid="snapshot-panel">
      <div className="flex flex-wrap items-end gap-3">
        <h2 className="mr-2">Wavefield snapshots</h2>
        <label className="label">Shot
          <select className="field mt-1 w-auto" value={index} onChange={(e) => setIndex(Number(e.target.value))} data-testid="snapshot-shot">
            {sets.map((s, i) => <SnapshotOption key={s.hash + s.label} hash={s.hash} label={s.label} value={i} />)}
          </select>
        </label>
        <p className="text-xs muted">
          The modelling keeps snapshots of one shot per step.{" "}
          <Link className="text-accent hover:underline" href={`/runs/${runId}/rerun?from=${encodeURIComponent(chosen.label)}`}>Rerun {chosen.label}</Link> with another “snapshot gather” to see another shot.
        </p>
      </div>
      {outline.error ? <p role="alert" className="text-sm text-bad">{outline.error.message}</p> : null}
      {o ? <SnapshotPlayer key={chosen.hash} hash={chosen.hash} shotId={o.shotId} component={o.component} frameCount={o.timesS.length} timesS={o.timesS} positionsHash={positionsHash} /> : <p className="text-sm muted">Loading snapshots…</p>}
    </div>
  );
}

function SnapshotOption({ hash, label, value }: { hash: string; label: string; value: number }) {
  const q = useQuery(artifactQueries.outline(hash));
  const shot = q.data && q.data.kind === "snapshots" && "shotId" in q.data ? q.data.shotId : "…";
  return <option value={value}>{shot} ({label})</option>;
}

/** Frames of one snapshot set: slider and play button; axes, colour bar, source and receivers on each frame. */
export function SnapshotPlayer({
  hash,
  shotId,
  component,
  frameCount,
  timesS,
  positionsHash,
}: {
  hash: string;
  shotId: string;
  component: string;
  frameCount: number;
  timesS: number[];
  positionsHash?: string;
}) {
  const [frame, setFrame] = useState(0);
  const [playing, setPlaying] = useState(false);
  const q = useQuery(artifactQueries.snapshot(hash, frame));
  const positions = useQuery({ ...artifactQueries.positions(positionsHash ?? ""), enabled: Boolean(positionsHash) });
  const gathers = useQuery({ ...artifactQueries.outline(positionsHash ?? ""), enabled: Boolean(positionsHash) });
  const shotX = gathers.data && gathers.data.kind === "gathers" && "gathers" in gathers.data ? (gathers.data.gathers.find((g) => g.id === shotId)?.sourceX ?? null) : null;
  const canvas = useRef<HTMLCanvasElement>(null);
  const [wrap, width] = useElementWidth();

  useEffect(() => {
    if (!playing) return;
    const id = window.setInterval(() => setFrame((f) => (f + 1) % frameCount), 400);
    return () => window.clearInterval(id);
  }, [playing, frameCount]);

  const h = q.data?.header;
  const extentX = h ? (h.nx - 1) * h.spacingM : 1;
  const extentZ = h ? (h.nz - 1) * h.spacingM : 1;
  const pw = Math.max(100, width - M.left - M.right);
  const ph = h ? Math.max(120, Math.min(460, (pw * extentZ) / extentX)) : 240;
  const height = ph + M.top + M.bottom;

  useEffect(() => {
    const c = canvas.current;
    if (!c || !q.data || width === 0) return;
    const { header, payload } = q.data;
    const peak = clipLevel(payload);
    const dpr = Math.min(2, window.devicePixelRatio || 1);
    c.width = Math.round(width * dpr);
    c.height = Math.round(height * dpr);
    const ctx = c.getContext("2d")!;
    ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
    ctx.fillStyle = "#fff";
    ctx.fillRect(0, 0, width, height);
    ctx.imageSmoothingEnabled = false;
    ctx.drawImage(gridToCanvas(payload, header.nx, header.nz, -peak, peak, DIVERGING), M.left, M.top, pw, ph);
    const xPx = (x: number) => M.left + ((x - header.originX) / extentX) * pw;
    const zPx = (z: number) => M.top + ((z - header.originZ) / extentZ) * ph;
    ctx.strokeStyle = "#4a5559";
    ctx.fillStyle = "#4a5559";
    ctx.font = "11px system-ui, sans-serif";
    ctx.strokeRect(M.left + 0.5, M.top + 0.5, pw - 1, ph - 1);
    ctx.textAlign = "center";
    ctx.textBaseline = "top";
    for (const x of niceTicks(header.originX, header.originX + extentX, Math.max(2, pw / 70))) {
      if (x < header.originX - 1e-9 || x > header.originX + extentX + 1e-9) continue;
      ctx.fillRect(xPx(x), M.top + ph, 1, 4);
      ctx.fillText(tickLabel(x), xPx(x), M.top + ph + 6);
    }
    ctx.fillText("Distance along the profile (m)", M.left + pw / 2, M.top + ph + 22);
    ctx.textAlign = "right";
    ctx.textBaseline = "middle";
    for (const z of niceTicks(header.originZ, header.originZ + extentZ, Math.max(2, ph / 40))) {
      if (z < header.originZ - 1e-9 || z > header.originZ + extentZ + 1e-9) continue;
      ctx.fillRect(M.left - 4, zPx(z), 4, 1);
      ctx.fillText(tickLabel(z), M.left - 6, zPx(z));
    }
    ctx.save();
    ctx.translate(14, M.top + ph / 2);
    ctx.rotate(-Math.PI / 2);
    ctx.textAlign = "center";
    ctx.fillText("Depth (m)", 0, 0);
    ctx.restore();
    // Receivers (triangles) and the source of this shot (star) on the surface.
    if (positions.data) {
      ctx.fillStyle = "#1c2326";
      for (const x of positions.data.receiversX) {
        const px = xPx(x);
        ctx.beginPath();
        ctx.moveTo(px, M.top - 2);
        ctx.lineTo(px - 3, M.top - 8);
        ctx.lineTo(px + 3, M.top - 8);
        ctx.closePath();
        ctx.fill();
      }
    }
    if (shotX !== null) {
      ctx.fillStyle = "#d0611b";
      const px = xPx(shotX);
      ctx.beginPath();
      for (let k = 0; k < 10; k++) {
        const r = k % 2 === 0 ? 7 : 3;
        const a = -Math.PI / 2 + (k * Math.PI) / 5;
        const x = px + r * Math.cos(a);
        const y = M.top - 18 + r * Math.sin(a);
        if (k === 0) ctx.moveTo(x, y);
        else ctx.lineTo(x, y);
      }
      ctx.closePath();
      ctx.fill();
    }
    // Symmetric colour bar: −clip (blue) through 0 (white) to +clip (red).
    const bx = M.left + pw + 18;
    for (let i = 0; i < ph; i++) {
      ctx.fillStyle = lutCss(DIVERGING, 255 * (1 - i / ph));
      ctx.fillRect(bx, M.top + i, 14, 1.5);
    }
    ctx.strokeStyle = "#4a5559";
    ctx.strokeRect(bx + 0.5, M.top + 0.5, 13, ph - 1);
    ctx.fillStyle = "#4a5559";
    ctx.textAlign = "left";
    ctx.textBaseline = "middle";
    ctx.fillText(`+${tickLabel(peak)}`, bx + 18, M.top + 4);
    ctx.fillText("0", bx + 18, M.top + ph / 2);
    ctx.fillText(`−${tickLabel(peak)}`, bx + 18, M.top + ph - 4);
    ctx.textBaseline = "bottom";
    ctx.fillText(component, bx, M.top - 4);
  }, [q.data, width, height, pw, ph, extentX, extentZ, positions.data, shotX, component]);

  return (
    <div className="space-y-2" data-testid="snapshot-player">
      <div className="flex items-center gap-3 text-sm">
        <button type="button" className="btn" onClick={() => setPlaying((p) => !p)}>{playing ? "Pause" : "Play"}</button>
        <input type="range" min={0} max={frameCount - 1} value={frame} onChange={(e) => setFrame(Number(e.target.value))} aria-label="Frame" className="w-64" />
        <span className="tabular-nums muted">shot {shotId} · frame {frame + 1}/{frameCount} · t = {formatNumber((timesS[frame] ?? 0) * 1000, "ms", 4)}</span>
      </div>
      <div ref={wrap} className="w-full max-w-5xl">
        <canvas ref={canvas} style={{ width: "100%", height }} role="img" aria-label={`Wavefield snapshot of shot ${shotId}`} data-testid="snapshot-canvas" />
      </div>
      <p className="text-xs muted">
        Source ★ at {shotX !== null ? formatNumber(shotX, "m", 4) : "—"}; receivers ▼ on the surface. Colours clipped at the 99th percentile of the frame&apos;s
        amplitudes (model units) so the waves away from the source stay visible.
      </p>
    </div>
  );
}
