/**
 * The report's panels as lists of plain drawing shapes (lines, paths, rectangles, text and
 * server-rendered PNG images), in points with y down. The PDF writer draws them with pdfkit and
 * the print-friendly page draws the same lists as SVG, so both show the same figures.
 *
 * Panels: a shot gather as wiggle traces (optionally a second set overlaid), a model section
 * with its colour bar, depth profiles of Vs at chosen positions, and the misfit curve by stage.
 * Units on every axis: metres, milliseconds, m/s.
 */
import type { ElasticModel, Gather } from "../types";
import { encodePngRgb } from "./png";

export type Shape =
  | { t: "line"; x1: number; y1: number; x2: number; y2: number; stroke: string; width?: number; dash?: number[] }
  | { t: "path"; points: Array<[number, number]>; stroke?: string; fill?: string; width?: number; dash?: number[]; close?: boolean }
  | { t: "rect"; x: number; y: number; w: number; h: number; fill?: string; stroke?: string; width?: number }
  | { t: "text"; x: number; y: number; text: string; size: number; anchor?: "start" | "middle" | "end"; bold?: boolean; rotate?: number; color?: string }
  | { t: "image"; x: number; y: number; w: number; h: number; png: Uint8Array };

export interface Figure {
  width: number;
  height: number;
  shapes: Shape[];
}

const INK = "#1f2933";
const SOFT = "#52606d";
const GRID = "#d9dee3";
/** Colours of the stages and positions, in order (chosen for contrast on white and in grey print). */
export const SERIES_COLOURS = ["#1f5f8b", "#b03a2e", "#2e7d4f", "#8e5ea2", "#c27c0e", "#3d4a56"];

/** About five round tick values covering [lo, hi] (steps 1, 2 or 5 times a power of ten). */
export function niceTicks(lo: number, hi: number, count = 5): number[] {
  if (!Number.isFinite(lo) || !Number.isFinite(hi)) return [];
  if (hi < lo) [lo, hi] = [hi, lo];
  if (hi === lo) return [lo];
  const raw = (hi - lo) / count;
  const p = 10 ** Math.floor(Math.log10(raw));
  const step = [1, 2, 5, 10].map((m) => m * p).find((s) => s >= raw) ?? 10 * p;
  const out: number[] = [];
  for (let k = Math.ceil(lo / step - 1e-9); k * step <= hi + step * 1e-9; k++) out.push(+(k * step).toPrecision(12));
  return out;
}

/** A tick value as text: plain for everyday magnitudes, in powers of ten for very small or large ones. */
export function tickText(v: number): string {
  const a = Math.abs(v);
  if (v !== 0 && (a < 1e-3 || a >= 1e6)) return v.toExponential(2).replace(/\.?0+e/, "e");
  return String(+v.toPrecision(6));
}

/** Axes frame with ticks and labels around the plot box (x0, y0, w, h). */
function axes(
  shapes: Shape[],
  box: { x: number; y: number; w: number; h: number },
  x: { lo: number; hi: number; label: string },
  y: { lo: number; hi: number; label: string; down?: boolean },
  options: { grid?: boolean } = {},
): { sx: (v: number) => number; sy: (v: number) => number } {
  const sx = (v: number) => box.x + ((v - x.lo) / (x.hi - x.lo || 1)) * box.w;
  const sy = (v: number) => (y.down ? box.y + ((v - y.lo) / (y.hi - y.lo || 1)) * box.h : box.y + box.h - ((v - y.lo) / (y.hi - y.lo || 1)) * box.h);
  for (const v of niceTicks(x.lo, x.hi)) {
    const px = sx(v);
    if (options.grid) shapes.push({ t: "line", x1: px, y1: box.y, x2: px, y2: box.y + box.h, stroke: GRID, width: 0.4 });
    shapes.push({ t: "line", x1: px, y1: box.y + box.h, x2: px, y2: box.y + box.h + 3, stroke: INK, width: 0.6 });
    shapes.push({ t: "text", x: px, y: box.y + box.h + 11, text: tickText(v), size: 7, anchor: "middle", color: SOFT });
  }
  for (const v of niceTicks(y.lo, y.hi)) {
    const py = sy(v);
    if (options.grid) shapes.push({ t: "line", x1: box.x, y1: py, x2: box.x + box.w, y2: py, stroke: GRID, width: 0.4 });
    shapes.push({ t: "line", x1: box.x - 3, y1: py, x2: box.x, y2: py, stroke: INK, width: 0.6 });
    shapes.push({ t: "text", x: box.x - 5, y: py + 2.5, text: tickText(v), size: 7, anchor: "end", color: SOFT });
  }
  shapes.push({ t: "rect", x: box.x, y: box.y, w: box.w, h: box.h, stroke: INK, width: 0.7 });
  shapes.push({ t: "text", x: box.x + box.w / 2, y: box.y + box.h + 24, text: x.label, size: 8, anchor: "middle", color: INK });
  shapes.push({ t: "text", x: box.x - 34, y: box.y + box.h / 2, text: y.label, size: 8, anchor: "middle", rotate: -90, color: INK });
  return { sx, sy };
}

/** Per-trace peak of |sample| over the live traces, `[trace][sample]` layout. */
function tracePeaks(g: Gather): Float64Array {
  const n = g.traces.length;
  const out = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    let m = 0;
    for (let k = 0; k < g.sampleCount; k++) m = Math.max(m, Math.abs(g.data[i * g.sampleCount + k]));
    out[i] = m;
  }
  return out;
}

/**
 * A shot gather as wiggle traces against receiver position (m) and time (ms, down), each trace
 * scaled to its own peak (display only). `overlay` (e.g. synthetics) is drawn over it in red,
 * scaled the same way, trace by trace by receiver position.
 */
export function gatherFigure(g: Gather, o: { width: number; height: number; title: string; overlay?: Gather; maxTimeMs?: number; legend?: [string, string] }): Figure {
  const shapes: Shape[] = [];
  shapes.push({ t: "text", x: 0, y: 10, text: o.title, size: 9, bold: true, color: INK });
  const box = { x: 44, y: 22, w: o.width - 54, h: o.height - 58 };
  const xs = g.traces.map((t) => t.receiverX);
  let xlo = Math.min(...xs);
  let xhi = Math.max(...xs);
  const spacing = g.traces.length > 1 ? (xhi - xlo) / (g.traces.length - 1) : 1;
  xlo -= spacing;
  xhi += spacing;
  const t0 = g.startTimeS * 1000;
  const tEnd = Math.min(o.maxTimeMs ?? Infinity, t0 + g.sampleCount * g.sampleIntervalS * 1000);
  const { sx, sy } = axes(shapes, box, { lo: xlo, hi: xhi, label: "receiver position along the profile (m)" }, { lo: t0, hi: tEnd, label: "time (ms)", down: true });
  const halfWidth = (Math.abs(sx(xlo + spacing) - sx(xlo)) || 4) * 0.9;
  const draw = (gather: Gather, colour: string, width: number) => {
    const peaks = tracePeaks(gather);
    const dt = gather.sampleIntervalS * 1000;
    const kEnd = Math.min(gather.sampleCount, Math.floor((tEnd - gather.startTimeS * 1000) / dt) + 1);
    // At most about two points per vertical point of the panel: enough for the eye, small files.
    const stride = Math.max(1, Math.floor(kEnd / (box.h * 2)));
    gather.traces.forEach((tr, i) => {
      if (tr.dead || peaks[i] === 0) return;
      const cx = sx(tr.receiverX);
      const pts: Array<[number, number]> = [];
      for (let k = 0; k < kEnd; k += stride) {
        const v = gather.data[i * gather.sampleCount + k] / peaks[i];
        pts.push([cx + v * halfWidth, sy(gather.startTimeS * 1000 + k * dt)]);
      }
      shapes.push({ t: "path", points: pts, stroke: colour, width });
    });
  };
  draw(g, INK, 0.45);
  if (o.overlay) draw(o.overlay, "#c0392b", 0.45);
  const src = g.traces[0]?.sourceX;
  if (src !== undefined && src >= xlo && src <= xhi) {
    shapes.push({ t: "path", points: [[sx(src), box.y - 1], [sx(src) - 3.5, box.y - 7], [sx(src) + 3.5, box.y - 7]], fill: "#c27c0e", close: true });
  }
  if (o.legend) {
    // In the title line, right-aligned: clear of the axis labels.
    const ly = 10;
    const right = box.x + box.w;
    shapes.push({ t: "line", x1: right - 150, y1: ly - 3, x2: right - 136, y2: ly - 3, stroke: INK, width: 1 });
    shapes.push({ t: "text", x: right - 132, y: ly, text: o.legend[0], size: 7, color: INK });
    shapes.push({ t: "line", x1: right - 68, y1: ly - 3, x2: right - 54, y2: ly - 3, stroke: "#c0392b", width: 1 });
    shapes.push({ t: "text", x: right - 50, y: ly, text: o.legend[1], size: 7, color: INK });
  }
  return { width: o.width, height: o.height, shapes };
}

const SEQUENTIAL_ANCHORS: Array<[number, number, number]> = [
  [38, 24, 84],
  [44, 79, 140],
  [33, 131, 141],
  [64, 176, 110],
  [172, 206, 76],
  [250, 232, 150],
];

/** The section colour of u in [0, 1] (the control room's sequential map: slow ground dark). */
export function sequentialColour(u: number): [number, number, number] {
  const f = Math.max(0, Math.min(1, u)) * (SEQUENTIAL_ANCHORS.length - 1);
  const k = Math.min(SEQUENTIAL_ANCHORS.length - 2, Math.floor(f));
  const w = f - k;
  const a = SEQUENTIAL_ANCHORS[k];
  const b = SEQUENTIAL_ANCHORS[k + 1];
  return [Math.round(a[0] + (b[0] - a[0]) * w), Math.round(a[1] + (b[1] - a[1]) * w), Math.round(a[2] + (b[2] - a[2]) * w)];
}

/** "#rrggbb" (pdfkit and SVG both read it). */
const hex = (rgb: [number, number, number]) => `#${rgb.map((c) => c.toString(16).padStart(2, "0")).join("")}`;

/** A `[z][x]` grid as a PNG, one pixel per cell, values mapped from [lo, hi]. */
export function gridPng(values: Float32Array, nx: number, nz: number, lo: number, hi: number): Uint8Array {
  const rgb = new Uint8Array(nx * nz * 3);
  for (let i = 0; i < nx * nz; i++) rgb.set(sequentialColour((values[i] - lo) / (hi - lo || 1)), i * 3);
  return encodePngRgb(nx, nz, rgb);
}

/** Smallest and largest finite value of an array. */
export function valueRange(values: ArrayLike<number>): { min: number; max: number } {
  let min = Infinity;
  let max = -Infinity;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (!Number.isFinite(v)) continue;
    if (v < min) min = v;
    if (v > max) max = v;
  }
  return { min, max };
}

/**
 * A model section of Vs (m/s) against position (m) and depth (m, down), true scale when it fits
 * the width, with a colour bar over [lo, hi] and dashed lines at `positionsM`.
 */
export function modelFigure(m: ElasticModel, o: { width: number; maxHeight: number; title: string; lo: number; hi: number; positionsM: number[] }): Figure {
  const shapes: Shape[] = [];
  shapes.push({ t: "text", x: 0, y: 10, text: o.title, size: 9, bold: true, color: INK });
  const widthM = (m.nx - 1) * m.spacingM;
  const depthM = (m.nz - 1) * m.spacingM;
  const boxW = o.width - 110;
  const boxH = Math.min(o.maxHeight - 58, boxW * (depthM / widthM));
  const box = { x: 44, y: 22, w: boxW, h: boxH };
  shapes.push({ t: "image", ...box, png: gridPng(m.vs, m.nx, m.nz, o.lo, o.hi) });
  const { sx } = axes(
    shapes,
    box,
    { lo: m.originX, hi: m.originX + widthM, label: "position along the profile (m)" },
    { lo: m.originZ, hi: m.originZ + depthM, label: "depth (m)", down: true },
  );
  o.positionsM.forEach((x, k) => {
    shapes.push({ t: "line", x1: sx(x), y1: box.y, x2: sx(x), y2: box.y + box.h, stroke: "#ffffff", width: 1.4 });
    shapes.push({ t: "line", x1: sx(x), y1: box.y, x2: sx(x), y2: box.y + box.h, stroke: SERIES_COLOURS[k % SERIES_COLOURS.length], width: 0.9, dash: [3, 2] });
    shapes.push({ t: "text", x: sx(x), y: box.y - 3, text: `${tickText(x)} m`, size: 6.5, anchor: "middle", color: SERIES_COLOURS[k % SERIES_COLOURS.length] });
  });
  // Colour bar: 64 bands from lo (bottom) to hi (top).
  const bar = { x: box.x + box.w + 16, y: box.y, w: 10, h: box.h };
  const bands = 64;
  for (let k = 0; k < bands; k++) {
    shapes.push({ t: "rect", x: bar.x, y: bar.y + bar.h - ((k + 1) * bar.h) / bands, w: bar.w, h: bar.h / bands + 0.3, fill: hex(sequentialColour((k + 0.5) / bands)) });
  }
  shapes.push({ t: "rect", ...bar, stroke: INK, width: 0.6 });
  for (const v of niceTicks(o.lo, o.hi, 4)) {
    const py = bar.y + bar.h - ((v - o.lo) / (o.hi - o.lo || 1)) * bar.h;
    shapes.push({ t: "line", x1: bar.x + bar.w, y1: py, x2: bar.x + bar.w + 3, y2: py, stroke: INK, width: 0.6 });
    shapes.push({ t: "text", x: bar.x + bar.w + 5, y: py + 2.5, text: tickText(v), size: 7, color: SOFT });
  }
  shapes.push({ t: "text", x: bar.x + bar.w + 36, y: bar.y + bar.h / 2, text: "Vs (m/s)", size: 8, anchor: "middle", rotate: -90, color: INK });
  return { width: o.width, height: box.y + box.h + 32, shapes };
}

/** Vs down the column of `m` nearest position `x` (m): depths (m) and values (m/s). */
export function depthProfile(m: ElasticModel, x: number): { depthM: number[]; vs: number[] } {
  const ix = Math.max(0, Math.min(m.nx - 1, Math.round((x - m.originX) / m.spacingM)));
  const depthM: number[] = [];
  const vs: number[] = [];
  for (let iz = 0; iz < m.nz; iz++) {
    depthM.push(m.originZ + iz * m.spacingM);
    vs.push(m.vs[iz * m.nx + ix]);
  }
  return { depthM, vs };
}

/** Depth profiles of Vs at `positionsM`, one small panel each: the starting model dashed, the inverted model solid. */
export function depthProfilesFigure(starting: ElasticModel, final: ElasticModel, o: { width: number; height: number; positionsM: number[]; lo: number; hi: number }): Figure {
  const shapes: Shape[] = [];
  const n = o.positionsM.length;
  const gap = 14;
  const panelW = (o.width - 44 - (n - 1) * gap) / n;
  o.positionsM.forEach((x, k) => {
    const colour = SERIES_COLOURS[k % SERIES_COLOURS.length];
    const box = { x: 44 + k * (panelW + gap), y: 18, w: panelW, h: o.height - 60 };
    shapes.push({ t: "text", x: box.x + box.w / 2, y: 10, text: `at ${tickText(x)} m`, size: 8.5, bold: true, anchor: "middle", color: colour });
    const a = depthProfile(starting, x);
    const b = depthProfile(final, x);
    const local: Shape[] = [];
    const { sx, sy } = axes(
      local,
      box,
      { lo: o.lo, hi: o.hi, label: "Vs (m/s)" },
      { lo: a.depthM[0], hi: a.depthM[a.depthM.length - 1], label: k === 0 ? "depth (m)" : "", down: true },
      { grid: true },
    );
    shapes.push(...local);
    shapes.push({ t: "path", points: a.vs.map((v, i) => [sx(v), sy(a.depthM[i])]), stroke: SOFT, width: 0.9, dash: [3, 2] });
    shapes.push({ t: "path", points: b.vs.map((v, i) => [sx(v), sy(b.depthM[i])]), stroke: colour, width: 1.2 });
  });
  const ly = o.height - 6;
  shapes.push({ t: "line", x1: 44, y1: ly - 3, x2: 58, y2: ly - 3, stroke: SOFT, width: 0.9, dash: [3, 2] });
  shapes.push({ t: "text", x: 62, y: ly, text: "starting model", size: 7, color: INK });
  shapes.push({ t: "line", x1: 140, y1: ly - 3, x2: 154, y2: ly - 3, stroke: INK, width: 1.2 });
  shapes.push({ t: "text", x: 158, y: ly, text: "inverted model", size: 7, color: INK });
  return { width: o.width, height: o.height, shapes };
}

/**
 * The misfit by iteration, one colour per frequency stage. The misfit jumps up where a stage
 * starts because higher frequencies enter the comparison (Bunks et al. 1995, Geophysics 60):
 * the jump is drawn (dotted), not hidden.
 */
export function misfitFigure(stages: Array<{ stage: number; lowPassHz: number | null; points: Array<{ x: number; y: number }> }>, o: { width: number; height: number }): Figure {
  const shapes: Shape[] = [];
  const all = stages.flatMap((s) => s.points);
  const box = { x: 56, y: 14, w: o.width - 166, h: o.height - 50 };
  if (all.length === 0) {
    shapes.push({ t: "text", x: 0, y: 20, text: "No misfit was recorded.", size: 9, color: SOFT });
    return { width: o.width, height: 30, shapes };
  }
  const xr = valueRange(all.map((p) => p.x));
  const yr = valueRange(all.map((p) => p.y));
  const pad = (yr.max - yr.min) * 0.05 || Math.abs(yr.max) * 0.05 || 1;
  const { sx, sy } = axes(shapes, box, { lo: xr.min, hi: Math.max(xr.max, xr.min + 1), label: "iteration" }, { lo: Math.max(0, yr.min - pad), hi: yr.max + pad, label: "misfit" }, { grid: true });
  let prev: { x: number; y: number } | null = null;
  stages.forEach((s, k) => {
    const colour = SERIES_COLOURS[k % SERIES_COLOURS.length];
    if (prev && s.points[0]) shapes.push({ t: "line", x1: sx(prev.x), y1: sy(prev.y), x2: sx(s.points[0].x), y2: sy(s.points[0].y), stroke: SOFT, width: 0.8, dash: [1.5, 1.5] });
    shapes.push({ t: "path", points: s.points.map((p) => [sx(p.x), sy(p.y)]), stroke: colour, width: 1.3 });
    for (const p of s.points) shapes.push({ t: "rect", x: sx(p.x) - 1.6, y: sy(p.y) - 1.6, w: 3.2, h: 3.2, fill: colour });
    const ly = box.y + 6 + k * 13;
    shapes.push({ t: "line", x1: box.x + box.w + 12, y1: ly, x2: box.x + box.w + 26, y2: ly, stroke: colour, width: 1.3 });
    shapes.push({ t: "text", x: box.x + box.w + 30, y: ly + 2.5, text: `stage ${s.stage}${s.lowPassHz !== null ? ` (to ${tickText(s.lowPassHz)} Hz)` : ""}`, size: 7.5, color: INK });
    prev = s.points[s.points.length - 1] ?? prev;
  });
  return { width: o.width, height: o.height, shapes };
}
