"use client";

import { useEffect, useMemo, useRef, useState } from "react";
import { useQuery } from "@tanstack/react-query";
import { artifactQueries } from "@/app/lib/queries";
import { niceTicks, tickLabel } from "@/app/ui/charts/ticks";
import { formatNumber } from "@/app/ui/format";
import { gridToCanvas, lutCss, SEQUENTIAL } from "./colour-maps";
import { ModelCautions } from "./cautions";
import { modelHeading, type ModelKind } from "./model-kind";
import { useElementWidth } from "@/app/ui/use-element-width";

export type Field = "vs" | "vp" | "rho";
export const FIELDS: Record<Field, { label: string; symbol: string; unit: string; index: number }> = {
  vs: { label: "S-wave velocity Vs", symbol: "Vs", unit: "m/s", index: 0 },
  vp: { label: "P-wave velocity Vp", symbol: "Vp", unit: "m/s", index: 1 },
  rho: { label: "Density", symbol: "Density", unit: "kg/m³", index: 2 },
};

/** Smallest and largest value of one field of a model payload (vs, vp, rho one after the other). */
export function fieldRange(payload: Float32Array, nx: number, nz: number, field: Field): { lo: number; hi: number } {
  const n = nx * nz;
  const values = payload.subarray(FIELDS[field].index * n, (FIELDS[field].index + 1) * n);
  let lo = Infinity;
  let hi = -Infinity;
  for (let i = 0; i < n; i++) {
    if (values[i] < lo) lo = values[i];
    if (values[i] > hi) hi = values[i];
  }
  return { lo, hi };
}

const M = { left: 56, right: 90, top: 30, bottom: 40 };

/**
 * A model section: Vs, Vp or density as a colour image with its colour bar, distance and depth
 * in metres, receivers (triangles) and sources (stars) on the surface, and the depth profile
 * at a clicked position (depth growing downwards). The heading and the cautions say what the
 * model is (`kind`: starting model, or inverted model at an iteration). Two sections can share
 * one colour scale (`scale`) and one property (`field`, `onFieldChange`).
 */
export function ModelSection({
  hash,
  positionsHash,
  kind,
  source,
  scale,
  field: fieldProp,
  onFieldChange,
  cautions = true,
}: {
  hash: string;
  positionsHash?: string;
  kind: ModelKind;
  /** Where the model comes from, e.g. "build-model, run 12". */
  source?: string;
  /** Shared colour scale (e.g. two models side by side); default the model's own range. */
  scale?: { lo: number; hi: number };
  field?: Field;
  onFieldChange?: (f: Field) => void;
  cautions?: boolean;
}) {
  const model = useQuery(artifactQueries.model(hash));
  const positions = useQuery({ ...artifactQueries.positions(positionsHash ?? ""), enabled: Boolean(positionsHash) });
  const [ownField, setOwnField] = useState<Field>("vs");
  const field = fieldProp ?? ownField;
  const setField = onFieldChange ?? setOwnField;
  const [pickX, setPickX] = useState<number | null>(null);
  const [wrap, width] = useElementWidth();
  const canvas = useRef<HTMLCanvasElement>(null);

  const grid = useMemo(() => {
    if (!model.data) return null;
    const h = model.data.header;
    const n = h.nx * h.nz;
    const values = model.data.payload.subarray(FIELDS[field].index * n, (FIELDS[field].index + 1) * n);
    const own = fieldRange(model.data.payload, h.nx, h.nz, field);
    const { lo, hi } = scale ?? own;
    return { h, values, lo, hi };
  }, [model.data, field, scale]);

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
    for (const x of niceTicks(h.originX, h.originX + extentX, Math.max(2, pw / 70))) {
      if (x < h.originX - 1e-9 || x > h.originX + extentX + 1e-9) continue;
      ctx.fillRect(xPx(x), M.top + ph, 1, 4);
      ctx.fillText(tickLabel(x), xPx(x), M.top + ph + 6);
    }
    ctx.fillText("Distance along the profile (m)", M.left + pw / 2, M.top + ph + 22);
    ctx.textAlign = "right";
    ctx.textBaseline = "middle";
    for (const z of niceTicks(h.originZ, h.originZ + extentZ, Math.max(2, ph / 40))) {
      if (z < h.originZ - 1e-9 || z > h.originZ + extentZ + 1e-9) continue;
      ctx.fillRect(M.left - 4, zPx(z), 4, 1);
      ctx.fillText(tickLabel(z), M.left - 6, zPx(z));
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
    for (const v of niceTicks(grid.lo, grid.hi, Math.max(2, ph / 40))) {
      if (v < grid.lo || v > grid.hi) continue;
      const y = M.top + ph * (1 - (v - grid.lo) / (grid.hi - grid.lo || 1));
      ctx.fillRect(bx + 14, y, 3, 1);
      ctx.fillText(tickLabel(v), bx + 19, y);
    }
    ctx.textBaseline = "bottom";
    ctx.fillText(`${FIELDS[field].symbol} (${FIELDS[field].unit})`, bx - 4, M.top - 4);
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

  const heading = modelHeading(kind);
  return (
    <div className="space-y-3" data-testid="model-section" data-model-kind={kind.kind}>
      <div className="flex flex-wrap items-center gap-3">
        <h3 className="font-medium">{heading}{source ? <span className="ml-2 text-xs font-normal muted">from {source}</span> : null}</h3>
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
      {model.isLoading ? <p className="text-sm muted">Loading the model…</p> : null}
      <div className={`grid gap-4 ${cautions ? "xl:grid-cols-[1fr_260px]" : ""}`}>
        <div ref={wrap} className="w-full">
          <canvas ref={canvas} style={{ width: "100%", height }} onClick={onClick} role="img" aria-label={`${FIELDS[field].label} section`} data-testid="model-canvas" />
        </div>
        <div className="card p-3" data-testid="depth-profile">
          <p className="text-xs font-medium text-ink-soft">Depth profile {profile ? `at ${formatNumber(profile.x, "m", 3)}` : ""}</p>
          {profile ? (
            <DepthProfile pts={profile.pts} symbol={FIELDS[field].symbol} unit={FIELDS[field].unit} />
          ) : (
            <p className="mt-6 text-center text-xs muted">No position chosen yet.</p>
          )}
        </div>
      </div>
      {cautions ? <ModelCautions model={kind} compact /> : null}
    </div>
  );
}

/** A property against depth, depth growing downwards from the surface (as in the section), axis titles with units. */
export function DepthProfile({ pts, symbol, unit, height = 256 }: { pts: Array<{ depth: number; value: number }>; symbol: string; unit: string; height?: number }) {
  const [wrap, width] = useElementWidth();
  const m = { left: 44, right: 14, top: 36, bottom: 8 };
  const pw = Math.max(40, width - m.left - m.right);
  const ph = height - m.top - m.bottom;
  const dMin = Math.min(...pts.map((p) => p.depth));
  const dMax = Math.max(...pts.map((p) => p.depth));
  let vLo = Math.min(...pts.map((p) => p.value));
  let vHi = Math.max(...pts.map((p) => p.value));
  if (vHi - vLo < 1e-6) {
    vLo -= 1;
    vHi += 1;
  }
  const vt = niceTicks(vLo, vHi, Math.max(2, pw / 60));
  const v0 = Math.min(vLo, vt[0] ?? vLo);
  const v1 = Math.max(vHi, vt.at(-1) ?? vHi);
  const x = (v: number) => m.left + ((v - v0) / (v1 - v0 || 1)) * pw;
  // Depth grows downwards: the shallowest point at the top.
  const y = (d: number) => m.top + ((d - dMin) / (dMax - dMin || 1)) * ph;
  // The grid nodes joined by straight lines.
  const path = pts.map((p, i) => `${i ? "L" : "M"}${x(p.value).toFixed(1)},${y(p.depth).toFixed(1)}`).join(" ");
  return (
    <div ref={wrap} className="w-full" style={{ height }}>
      {width > 0 ? (
        <svg width={width} height={height} role="img" aria-label={`${symbol} against depth`} data-testid="depth-profile-svg">
          {vt.map((v) => (
            <g key={`v${v}`}>
              <line x1={x(v)} x2={x(v)} y1={m.top} y2={m.top + ph} stroke="#eef0ed" />
              <text x={x(v)} y={m.top - 8} textAnchor="middle" fontSize={10} fill="#4a5559">{tickLabel(v)}</text>
            </g>
          ))}
          {niceTicks(dMin, dMax, Math.max(2, ph / 35)).map((d) => (
            <g key={`d${d}`}>
              <line x1={m.left} x2={m.left + pw} y1={y(d)} y2={y(d)} stroke="#eef0ed" />
              <text x={m.left - 5} y={y(d)} textAnchor="end" dominantBaseline="middle" fontSize={10} fill="#4a5559" data-depth-tick={d}>{tickLabel(d)}</text>
            </g>
          ))}
          <rect x={m.left + 0.5} y={m.top + 0.5} width={pw - 1} height={ph - 1} fill="none" stroke="#4a5559" />
          <path d={path} fill="none" stroke="#1f5f8b" strokeWidth={2} />
          <text x={m.left + pw / 2} y={11} textAnchor="middle" fontSize={11} fill="#4a5559">{symbol} ({unit})</text>
          <text transform={`translate(11 ${m.top + ph / 2}) rotate(-90)`} textAnchor="middle" fontSize={11} fill="#4a5559">Depth (m)</text>
        </svg>
      ) : null}
    </div>
  );
}
