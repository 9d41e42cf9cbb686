"use client";

import { useEffect, useRef } from "react";
import { gridToCanvas, lutCss } from "@/app/ui/model/colour-maps";
import { useElementWidth } from "@/app/ui/use-element-width";

export interface Grid {
  nx: number;
  nz: number;
  spacingM: number;
  originX: number;
  originZ: number;
}

const M = { left: 52, right: 84, top: 12, bottom: 36 };

function niceStep(range: number, target: number): number {
  const raw = range / Math.max(1, target);
  const p = Math.pow(10, Math.floor(Math.log10(raw)));
  const n = raw / p;
  return (n < 1.5 ? 1 : n < 3.5 ? 2 : n < 7.5 ? 5 : 10) * p;
}

function tickText(v: number, step: number): string {
  const digits = step >= 1 ? 0 : Math.min(6, Math.ceil(-Math.log10(step)));
  return v.toFixed(digits);
}

/**
 * A grid on the model mesh as a colour image at true aspect ratio, with distance and depth axes
 * in metres, its colour bar between fixed limits [lo, hi] (values beyond are drawn in the end
 * colours) and a dashed line at the chosen profile position. Clicking picks a position.
 */
export function FieldCanvas({
  values,
  grid,
  lo,
  hi,
  lut,
  unit,
  label,
  pickX,
  onPick,
  testId,
}: {
  values: Float32Array;
  grid: Grid;
  lo: number;
  hi: number;
  lut: Uint32Array;
  unit: string;
  label: string;
  pickX: number | null;
  onPick?: (xM: number) => void;
  testId?: string;
}) {
  const [wrap, width] = useElementWidth();
  const canvas = useRef<HTMLCanvasElement>(null);

  const extentX = Math.max(grid.spacingM, (grid.nx - 1) * grid.spacingM);
  const extentZ = Math.max(grid.spacingM, (grid.nz - 1) * grid.spacingM);
  const pw = Math.max(100, width - M.left - M.right);
  const ph = Math.max(90, Math.min(360, (pw * extentZ) / extentX));
  const height = ph + M.top + M.bottom;

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
    ctx.imageSmoothingEnabled = false;
    ctx.drawImage(gridToCanvas(values, grid.nx, grid.nz, lo, hi, lut), M.left, M.top, pw, ph);
    const xPx = (x: number) => M.left + ((x - grid.originX) / extentX) * pw;
    const zPx = (z: number) => M.top + ((z - grid.originZ) / extentZ) * ph;
    ctx.strokeStyle = "#4a5559";
    ctx.fillStyle = "#4a5559";
    ctx.font = "11px system-ui, sans-serif";
    ctx.strokeRect(M.left + 0.5, M.top + 0.5, pw - 1, ph - 1);
    ctx.textAlign = "center";
    ctx.textBaseline = "top";
    const xs = niceStep(extentX, pw / 70);
    for (let x = Math.ceil(grid.originX / xs) * xs; x <= grid.originX + extentX + 1e-9; x += xs) {
      ctx.fillRect(xPx(x), M.top + ph, 1, 4);
      ctx.fillText(tickText(x, xs), xPx(x), M.top + ph + 5);
    }
    ctx.fillText("Distance along the profile (m)", M.left + pw / 2, M.top + ph + 20);
    ctx.textAlign = "right";
    ctx.textBaseline = "middle";
    const zs = niceStep(extentZ, ph / 30);
    for (let z = Math.ceil(grid.originZ / zs) * zs; z <= grid.originZ + extentZ + 1e-9; z += zs) {
      ctx.fillRect(M.left - 4, zPx(z), 4, 1);
      ctx.fillText(tickText(z, zs), M.left - 6, zPx(z));
    }
    ctx.save();
    ctx.translate(12, M.top + ph / 2);
    ctx.rotate(-Math.PI / 2);
    ctx.textAlign = "center";
    ctx.fillText("Depth (m)", 0, 0);
    ctx.restore();
    if (pickX !== null) {
      ctx.strokeStyle = "#1c2326";
      ctx.setLineDash([4, 3]);
      ctx.beginPath();
      ctx.moveTo(xPx(pickX), M.top);
      ctx.lineTo(xPx(pickX), M.top + ph);
      ctx.stroke();
      ctx.setLineDash([]);
    }
    // Colour bar: fixed limits, unit on top.
    const bx = M.left + pw + 14;
    for (let i = 0; i < ph; i++) {
      ctx.fillStyle = lutCss(lut, 255 * (1 - i / ph));
      ctx.fillRect(bx, M.top + i, 12, 1.5);
    }
    ctx.strokeStyle = "#4a5559";
    ctx.strokeRect(bx + 0.5, M.top + 0.5, 11, ph - 1);
    ctx.fillStyle = "#4a5559";
    ctx.textAlign = "left";
    const span = hi - lo || 1;
    const vs = niceStep(span, ph / 28);
    for (let v = Math.ceil(lo / vs) * vs; v <= hi + 1e-9 * span; v += vs) {
      const y = M.top + ph * (1 - (v - lo) / span);
      ctx.fillRect(bx + 12, y, 3, 1);
      ctx.fillText(tickText(Math.abs(v) < vs * 1e-6 ? 0 : v, vs), bx + 17, y);
    }
    ctx.textBaseline = "top";
    ctx.fillText(unit, bx + 17, M.top + ph + 5);
  }, [values, grid, lo, hi, lut, unit, width, height, pw, ph, pickX, extentX, extentZ]);

  function onClick(e: React.MouseEvent<HTMLCanvasElement>) {
    if (!onPick) return;
    const rect = e.currentTarget.getBoundingClientRect();
    const fx = (e.clientX - rect.left - M.left) / pw;
    const fz = (e.clientY - rect.top - M.top) / ph;
    if (fx < 0 || fx > 1 || fz < 0 || fz > 1) return;
    onPick(grid.originX + fx * extentX);
  }

  return (
    <div ref={wrap} className="w-full">
      <canvas ref={canvas} style={{ width: "100%", height }} onClick={onClick} role="img" aria-label={label} data-testid={testId} />
    </div>
  );
}
