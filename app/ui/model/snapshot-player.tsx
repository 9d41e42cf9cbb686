"use client";

import { useEffect, useRef, useState } from "react";
import { useQuery } from "@tanstack/react-query";
import { artifactQueries } from "@/app/lib/queries";
import { DIVERGING, gridToCanvas } from "./colour-maps";

/** Wavefield snapshots as frames: a slider and play button, each frame drawn with a symmetric colour scale. */
export function SnapshotPlayer({ hash, frameCount, timesS }: { hash: string; frameCount: number; timesS: number[] }) {
  const [frame, setFrame] = useState(0);
  const [playing, setPlaying] = useState(false);
  const q = useQuery(artifactQueries.snapshot(hash, frame));
  const canvas = useRef<HTMLCanvasElement>(null);

  useEffect(() => {
    if (!playing) return;
    const id = window.setInterval(() => setFrame((f) => (f + 1) % frameCount), 400);
    return () => window.clearInterval(id);
  }, [playing, frameCount]);

  useEffect(() => {
    const c = canvas.current;
    if (!c || !q.data) return;
    const { header, payload } = q.data;
    const peak = clipLevel(payload);
    const img = gridToCanvas(payload, header.nx, header.nz, -peak || -1, peak || 1, DIVERGING);
    c.width = header.nx * 4;
    c.height = header.nz * 4;
    const ctx = c.getContext("2d")!;
    ctx.imageSmoothingEnabled = false;
    ctx.drawImage(img, 0, 0, c.width, c.height);
  }, [q.data]);

  const h = q.data?.header;
  return (
    <div className="space-y-2" data-testid="snapshot-player">
      <div className="flex items-center gap-3 text-sm">
        <button type="button" className="btn" onClick={() => setPlaying((p) => !p)}>{playing ? "Pause" : "Play"}</button>
        <input type="range" min={0} max={frameCount - 1} value={frame} onChange={(e) => setFrame(Number(e.target.value))} aria-label="Frame" className="w-64" />
        <span className="tabular-nums muted">frame {frame + 1}/{frameCount} · t = {((timesS[frame] ?? 0) * 1000).toFixed(1)} ms</span>
      </div>
      <canvas ref={canvas} className="w-full max-w-3xl border border-line" style={{ imageRendering: "pixelated" }} role="img" aria-label="Wavefield snapshot" />
      {h ? (
        <p className="text-xs muted">
          Distance {h.originX.toFixed(1)} to {(h.originX + (h.nx - 1) * h.spacingM).toFixed(1)} m (left to right), depth{" "}
          {h.originZ.toFixed(1)} to {(h.originZ + (h.nz - 1) * h.spacingM).toFixed(1)} m (top to bottom). Colours clipped at the 99th
          percentile of the frame&apos;s amplitudes so the waves away from the source stay visible.
        </p>
      ) : null}
    </div>
  );
}

/** The 99th percentile of |v| over (a sample of) the frame: a clip level the source point does not dominate. */
function clipLevel(values: Float32Array): number {
  const step = Math.max(1, Math.floor(values.length / 20000));
  const sample: number[] = [];
  for (let i = 0; i < values.length; i += step) sample.push(Math.abs(values[i]));
  sample.sort((a, b) => a - b);
  return sample[Math.min(sample.length - 1, Math.floor(0.99 * sample.length))] || 1;
}
