"use client";

import { useEffect, useMemo, useRef, useState } from "react";
import { useQuery } from "@tanstack/react-query";
import { CartesianGrid, Line, LineChart, ResponsiveContainer, Tooltip, XAxis, YAxis } from "recharts";
import { artifactQueries } from "@/app/lib/queries";
import { gridToCanvas, lutCss, SEQUENTIAL } from "./colour-maps";
import { ModelCautions } from "./cautions";

type Field = "vs" | "vp" | "rho";
const FIELDS: Record<Field, { label: string; unit: string; index: number }> = {
  vs: { label: "S-wave velocity Vs", unit: "m/s", index: 0 },
  vp: { label: "P-wave velocity Vp", unit: "m/s", index: 1 },
  rho: { label: "Density", unit: "kg/m³", index: 2 },
};

const M = { left: 56, right: 90, top: 30, bottom: 40 };

function niceStep(range: number, target: number): number {
  const raw = range / Math.max(1, target);
  const p = Math.pow(10, Math.floor(Math.log10(raw)));
  const n = raw / p;
  return (n < 1.5 ? 1 : n < 3.5 ? 2 : n < 7.5 ? 5 : 10) * p;
}

/**
 * A model section: Vs, Vp or density as a colour image with its colour bar, distance and depth
 * in metres, receivers (triangles) and sources (stars) on the surface, and the depth profile
 * at a clicked position. The cautions are shown beside it.
 */
export function ModelSection({ hash, positionsHash, title }: { hash: string; positionsHash?: string; title: string }) {
  const model = useQuery(artifactQueries.model(hash));
  const positions = useQuery({ ...artifactQueries.positions(positionsHash ?? ""), enabled: Boolean(positionsHash) });
  const [field, setField] = useState<Field>("vs");
  const [pickX, setPickX] = useState<number | null>(null);
  const wrap = useRef<HTMLDivElement>(null);
  const canvas = useRef<HTMLCanvasElement>(null);
  const [width, setWidth] = useState(0);

  useEffect(() => {
    const el = wrap.current;
    if (!el) return;
    const ro = new ResizeObserver((e) => setWidth(Math.floor(e[0].contentRect.width)));
    ro.observe(el);
    return () => ro.disconnect();
  }, []);

  const grid = useMemo(() => {
    if (!model.data) return null;
    const h = model.data.header;
    const n = h.nx * h.nz;
    const values = model.data.payload.subarray(FIELDS[field].index * n, (FIELDS[field].index + 1) * n);
    let lo = Infinity;
    let hi = -Infinity;
    for (let i = 0; i < n; i++) {
      if (values[i] < lo) lo = values[i];
      if (values[i] > hi) hi = values[i];
    }
    return { h, values, lo, hi };
  }, [model.data, field]);

  const extentX = grid ? (grid.h.nx - 1) * grid.h.spacingM : 1;
  const extentZ = grid ? (grid.h.nz - 1) * grid.h.spacingM : 1;
  // Keep the section at true aspect ratio (1 m across = 1 m down), within sensible heights.
  const pw = Math.max(100, width - M.left - M.right);
  const ph = grid ? Math.max(140, Math.min(520, (pw * extentZ) / extentX)) : 300;
  const height = ph + M.top + M.bottom;

  useEffect(() => {
    const c = canvas.current;
    if (!c || !grid || width === 0) return;
    const dpr = Math.min(2, window.devicePixelRatio || 1);
    c.width = Math.round(width * dpr);
    c.height = Math.round(height * dpr);
    const ctx = c.getContext("2d")!;
    ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
    ctx.fillStyle = "#fff";
    ctx.fillRect(0, 0, width, height);
    const { h } = grid;
    const img = gridToCanvas(grid.values, h.nx, h.nz, grid.lo, grid.hi, SEQUENTIAL);
    ctx.imageSmoothingEnabled = false;
    ctx.drawImage(img, M.left, M.top, pw, ph);
    const xPx = (x: number) => M.left + ((x - h.originX) / extentX) * pw;
    const zPx = (z: number) => M.top + ((z - h.originZ) / extentZ) * ph;
    ctx.strokeStyle = "#4a5559";
    ctx.fillStyle = "#4a5559";
    ctx.font = "11px system-ui, sans-serif";
    ctx.strokeRect(M.left + 0.5, M.top + 0.5, pw - 1, ph - 1);
    // Distance axis (bottom) and depth axis (left), metres.
    ctx.textAlign = "center";
    ctx.textBaseline = "top";
    const xs = niceStep(extentX, pw / 70);
    for (let x = Math.ceil(h.originX / xs) * xs; x <= h.originX + extentX + 1e-9; x += xs) {
      ctx.fillRect(xPx(x), M.top + ph, 1, 4);
      ctx.fillText(String(Math.round(x * 10) / 10), xPx(x), M.top + ph + 6);
    }
    ctx.fillText("Distance along the profile (m)", M.left + pw / 2, M.top + ph + 22);
    ctx.textAlign = "right";
    ctx.textBaseline = "middle";
    const zs = niceStep(extentZ, ph / 40);
    for (let z = Math.ceil(h.originZ / zs) * zs; z <= h.originZ + extentZ + 1e-9; z += zs) {
      ctx.fillRect(M.left - 4, zPx(z), 4, 1);
      ctx.fillText(String(Math.round(z * 10) / 10), M.left - 6, zPx(z));
    }
    ctx.save();
    ctx.translate(14, M.top + ph / 2);
    ctx.rotate(-Math.PI / 2);
    ctx.textAlign = "center";
    ctx.fillText("Depth (m)", 0, 0);
    ctx.restore();
    // Receivers and sources along the surface.
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
      ctx.fillStyle = "#d0611b";
      for (const x of positions.data.sourcesX) {
        const px = xPx(x);
        ctx.beginPath();
        for (let k = 0; k < 10; k++) {
          const r = k % 2 === 0 ? 6 : 2.5;
          const a = -Math.PI / 2 + (k * Math.PI) / 5;
          const yy = M.top - 16 + r * Math.sin(a);
          if (k === 0) ctx.moveTo(px + r * Math.cos(a), yy);
          else ctx.lineTo(px + r * Math.cos(a), yy);
        }
        ctx.closePath();
        ctx.fill();
      }
    }
    // Chosen profile position.
    if (pickX !== null) {
      ctx.strokeStyle = "#ffffff";
      ctx.setLineDash([4, 3]);
      ctx.beginPath();
      ctx.moveTo(xPx(pickX), M.top);
      ctx.lineTo(xPx(pickX), M.top + ph);
      ctx.stroke();
      ctx.setLineDash([]);
    }
    // Colour bar with its unit.
    const bx = M.left + pw + 18;
    for (let i = 0; i < ph; i++) {
      ctx.fillStyle = lutCss(SEQUENTIAL, 255 * (1 - i / ph));
      ctx.fillRect(bx, M.top + i, 14, 1.5);
    }
    ctx.strokeStyle = "#4a5559";
    ctx.strokeRect(bx + 0.5, M.top + 0.5, 13, ph - 1);
    ctx.fillStyle = "#4a5559";
    ctx.textAlign = "left";
    const vs = niceStep(grid.hi - grid.lo || 1, ph / 40);
    for (let v = Math.ceil(grid.lo / vs) * vs; v <= grid.hi; v += vs) {
      const y = M.top + ph * (1 - (v - grid.lo) / (grid.hi - grid.lo || 1));
      ctx.fillText(String(Math.round(v)), bx + 18, y);
    }
    ctx.textBaseline = "bottom";
    ctx.fillText(FIELDS[field].unit, bx, M.top - 4);
  }, [grid, width, height, pw, ph, positions.data, pickX, extentX, extentZ, field]);

  const profile = useMemo(() => {
    if (!grid || pickX === null) return null;
    const { h } = grid;
    const ix = Math.max(0, Math.min(h.nx - 1, Math.round((pickX - h.originX) / h.spacingM)));
    const pts = [];
    for (let iz = 0; iz < h.nz; iz++) pts.push({ depth: h.originZ + iz * h.spacingM, value: grid.values[iz * h.nx + ix] });
    return { x: h.originX + ix * h.spacingM, pts };
  }, [grid, pickX]);

  function onClick(e: React.MouseEvent<HTMLCanvasElement>) {
    if (!grid) return;
    const rect = e.currentTarget.getBoundingClientRect();
    const fx = (e.clientX - rect.left - M.left) / pw;
    const fz = (e.clientY - rect.top - M.top) / ph;
    if (fx < 0 || fx > 1 || fz < 0 || fz > 1) return;
    setPickX(grid.h.originX + fx * extentX);
  }

  return (
    <div className="space-y-3" data-testid="model-section">
      <div className="flex flex-wrap items-center gap-3">
        <h3 className="font-medium">{title}</h3>
        <div role="radiogroup" aria-label="Property" className="flex gap-1">
          {(Object.keys(FIELDS) as Field[]).map((f) => (
            <button key={f} type="button" role="radio" aria-checked={field === f} onClick={() => setField(f)} className={`rounded-md px-2.5 py-1 text-xs ${field === f ? "bg-accent text-white" : "border border-line bg-panel"}`}>
              {FIELDS[f].label}
            </button>
          ))}
        </div>
        <span className="text-xs muted">Click the section for a depth profile.</span>
      </div>
      {model.error ? <p role="alert" className="text-sm text-bad">{model.error.message}</p> : null}
      <div className="grid gap-4 xl:grid-cols-[1fr_260px]">
        <div ref={wrap} className="w-full">
          <canvas ref={canvas} style={{ width: "100%", height }} onClick={onClick} role="img" aria-label={`${FIELDS[field].label} section`} data-testid="model-canvas" />
        </div>
        <div className="card p-3">
          <p className="text-xs font-medium text-ink-soft">Depth profile {profile ? `at ${profile.x.toFixed(1)} m` : ""}</p>
          {profile ? (
            <div className="h-64">
              <ResponsiveContainer width="100%" height="100%">
                <LineChart data={profile.pts} layout="vertical" margin={{ top: 8, right: 8, bottom: 16, left: 0 }}>
                  <CartesianGrid stroke="#eef0ed" />
                  <XAxis type="number" dataKey="value" domain={["auto", "auto"]} tick={{ fontSize: 10 }} label={{ value: FIELDS[field].unit, position: "insideBottom", offset: -8, fontSize: 10 }} />
                  <YAxis type="number" dataKey="depth" reversed tick={{ fontSize: 10 }} width={36} label={{ value: "m", angle: -90, position: "insideLeft", fontSize: 10 }} />
                  <Tooltip formatter={(v) => [`${Math.round(Number(v))} ${FIELDS[field].unit}`, FIELDS[field].label]} labelFormatter={(d) => `${d} m deep`} />
                  <Line dataKey="value" stroke="#1f5f8b" dot={false} strokeWidth={2} isAnimationActive={false} />
                </LineChart>
              </ResponsiveContainer>
            </div>
          ) : (
            <p className="mt-6 text-center text-xs muted">No position chosen yet.</p>
          )}
        </div>
      </div>
      <ModelCautions compact />
    </div>
  );
}
