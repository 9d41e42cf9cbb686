/**
 * Drawing gathers on a 2D canvas: wiggle traces with filled positive lobes, a variable-density
 * image, or both, with axes in metres (offset) and milliseconds, and picks and mute lines on top.
 *
 * Speed: the density image is built pixel by pixel into one ImageData (a column→trace and a
 * row→sample table, then a colour lookup), and wiggles are drawn with one min/max pair per
 * pixel row when there are more samples than rows, so the cost follows the canvas size rather
 * than the sample count. A 96-trace, 4000-sample gather draws in a few milliseconds.
 */

/** A gather as the browser holds it. Samples flat `[trace][sample]`. */
export interface GatherView {
  data: Float32Array;
  traces: number;
  samples: number;
  /** Sample interval, s. */
  dtS: number;
  /** Time of sample 0, s. */
  t0S: number;
  /** Signed offset of each trace, m. */
  offsetsM: number[];
  dead?: boolean[];
}

export type DisplayMode = "wiggle" | "density" | "both";

export interface DisplaySettings {
  mode: DisplayMode;
  /** Amplitude multiplier (1 = the reference amplitude spans one trace spacing). */
  gain: number;
  /** Largest excursion, in trace spacings (wiggles) or fraction of the reference (density, via gain). */
  clip: number;
  /** Reference amplitude: each trace's own peak, or the gather's peak. */
  scaling: "trace" | "gather";
  /** Traces evenly spaced by index, or placed at their true offsets. */
  spacing: "even" | "offset";
  /** Fixed reference amplitude (overrides `scaling`), e.g. to draw a difference on the scale of its first gather. */
  referenceAmplitude?: number;
}

/** The visible window: time in s, horizontal position in trace index (even) or metres (offset). */
export interface ViewWindow {
  tMinS: number;
  tMaxS: number;
  xMin: number;
  xMax: number;
}

export interface Overlays {
  /** `hand`: a pick edited by hand (drawn as a square); `pending`: an edit not saved yet (drawn in the pending colour). */
  picks?: Array<{ traceIndex: number; timeS: number; flagged: boolean; hand?: boolean; pending?: boolean }>;
  /** A trace to mark (the editor's chosen trace), drawn as a faint band. */
  selectedTrace?: number;
  mutes?: Array<{ role: string; timesS: number[] }>;
}

export const MARGIN = { left: 58, right: 14, top: 38, bottom: 12 };

export const COLOURS = {
  wiggle: "#1c2326",
  fill: "#1c2326",
  second: "#d0611b",
  axis: "#4a5559",
  grid: "rgba(28,35,38,0.08)",
  pick: "#d0611b",
  pickFlagged: "#b23a2e",
  pickHand: "#2f7a4f",
  pickPending: "#7b3fa0",
  mute: "#2f7a4f",
};

/** Horizontal position of trace i in view units. */
export function tracePosition(g: GatherView, settings: DisplaySettings, i: number): number {
  return settings.spacing === "offset" ? g.offsetsM[i] : i;
}

/**
 * The trace and time under a point of the canvas (CSS pixels from its top-left corner), the
 * inverse of the drawing's mapping: the nearest trace by position, the time at the point.
 * Null outside the plot area or when no trace is within one trace spacing.
 */
export function pointAt(
  g: GatherView,
  settings: DisplaySettings,
  view: ViewWindow,
  size: { width: number; height: number },
  x: number,
  y: number,
): { traceIndex: number; timeS: number } | null {
  const pw = Math.max(10, size.width - MARGIN.left - MARGIN.right);
  const ph = Math.max(10, size.height - MARGIN.top - MARGIN.bottom);
  const fx = (x - MARGIN.left) / pw;
  const fy = (y - MARGIN.top) / ph;
  if (!(fx >= 0 && fx <= 1 && fy >= 0 && fy <= 1) || g.traces === 0) return null;
  const at = view.xMin + fx * (view.xMax - view.xMin);
  let best = -1;
  let bestD = Infinity;
  for (let i = 0; i < g.traces; i++) {
    const d = Math.abs(tracePosition(g, settings, i) - at);
    if (d < bestD) {
      bestD = d;
      best = i;
    }
  }
  const spacing = settings.spacing === "offset" && g.traces > 1 ? Math.abs(g.offsetsM[g.traces - 1] - g.offsetsM[0]) / (g.traces - 1) || 1 : 1;
  if (bestD > spacing) return null;
  return { traceIndex: best, timeS: view.tMinS + fy * (view.tMaxS - view.tMinS) };
}

/** The whole gather's window (with half a trace spacing of margin either side). */
export function fullWindow(g: GatherView, settings: DisplaySettings): ViewWindow {
  const tMinS = g.t0S;
  const tMaxS = g.t0S + (g.samples - 1) * g.dtS;
  if (settings.spacing === "offset" && g.traces > 1) {
    let lo = Infinity;
    let hi = -Infinity;
    for (const o of g.offsetsM) {
      lo = Math.min(lo, o);
      hi = Math.max(hi, o);
    }
    const half = (hi - lo) / (g.traces - 1) / 2 || 0.5;
    return { tMinS, tMaxS, xMin: lo - half, xMax: hi + half };
  }
  return { tMinS, tMaxS, xMin: -0.5, xMax: g.traces - 0.5 };
}

const peakCache = new WeakMap<Float32Array, { perTrace: Float32Array; gather: number }>();

/** Peak absolute amplitude per trace and over the gather (cached per data array). */
export function peaks(g: GatherView): { perTrace: Float32Array; gather: number } {
  const hit = peakCache.get(g.data);
  if (hit) return hit;
  const perTrace = new Float32Array(g.traces);
  let gather = 0;
  for (let t = 0; t < g.traces; t++) {
    let m = 0;
    const base = t * g.samples;
    for (let s = 0; s < g.samples; s++) {
      const a = Math.abs(g.data[base + s]);
      if (a > m) m = a;
    }
    perTrace[t] = m;
    if (m > gather) gather = m;
  }
  const out = { perTrace, gather };
  peakCache.set(g.data, out);
  return out;
}

/** End colours of the density image: negative amplitudes blue, positive red, zero white. */
export const DENSITY_NEGATIVE_RGB = [31, 95, 139] as const;
export const DENSITY_POSITIVE_RGB = [176, 58, 46] as const;

// Diverging blue–white–red look-up table, 256 entries, RGBA packed little-endian.
const LUT = (() => {
  const lut = new Uint32Array(256);
  const neg = DENSITY_NEGATIVE_RGB;
  const pos = DENSITY_POSITIVE_RGB;
  for (let i = 0; i < 256; i++) {
    const v = (i - 127.5) / 127.5;
    const a = Math.min(1, Math.abs(v));
    const end = v < 0 ? neg : pos;
    const r = Math.round(255 + (end[0] - 255) * a);
    const gg = Math.round(255 + (end[1] - 255) * a);
    const b = Math.round(255 + (end[2] - 255) * a);
    lut[i] = (255 << 24) | (b << 16) | (gg << 8) | r;
  }
  return lut;
})();

function niceStep(range: number, target: number): number {
  const raw = range / Math.max(1, target);
  const p = Math.pow(10, Math.floor(Math.log10(raw)));
  const n = raw / p;
  return (n < 1.5 ? 1 : n < 3.5 ? 2 : n < 7.5 ? 5 : 10) * p;
}

/**
 * Draws one gather (and optionally a second one overlaid as coloured wiggles) into `ctx`,
 * whose canvas is `width` × `height` CSS pixels at `dpr` device pixels each. Returns the
 * time taken, ms.
 */
export function drawGather(
  ctx: CanvasRenderingContext2D,
  size: { width: number; height: number; dpr: number },
  g: GatherView,
  settings: DisplaySettings,
  view: ViewWindow,
  overlays: Overlays = {},
  second?: GatherView,
  title?: string,
): number {
  const started = performance.now();
  const { width, height, dpr } = size;
  ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
  ctx.clearRect(0, 0, width, height);
  ctx.fillStyle = "#ffffff";
  ctx.fillRect(0, 0, width, height);
  const pw = Math.max(10, width - MARGIN.left - MARGIN.right);
  const ph = Math.max(10, height - MARGIN.top - MARGIN.bottom);
  const x0 = MARGIN.left;
  const y0 = MARGIN.top;
  const xScale = pw / (view.xMax - view.xMin);
  const tScale = ph / (view.tMaxS - view.tMinS);
  const px = (pos: number) => x0 + (pos - view.xMin) * xScale;
  const py = (t: number) => y0 + (t - view.tMinS) * tScale;
  const pk = peaks(g);
  const ref = (t: number) => settings.referenceAmplitude ?? ((settings.scaling === "trace" ? pk.perTrace[t] : pk.gather) || 1);

  // Spacing between neighbouring traces in pixels (median for true offsets).
  let spacingPx = xScale;
  if (settings.spacing === "offset" && g.traces > 1) {
    const d: number[] = [];
    for (let i = 1; i < g.traces; i++) d.push(Math.abs(g.offsetsM[i] - g.offsetsM[i - 1]));
    d.sort((a, b) => a - b);
    spacingPx = (d[d.length >> 1] || 1) * xScale;
  }

  ctx.save();
  ctx.beginPath();
  ctx.rect(x0, y0, pw, ph);
  ctx.clip();

  if (settings.mode !== "wiggle") drawDensity(ctx, g, settings, view, { x0, y0, pw, ph, dpr, xScale, tScale }, ref);

  if (settings.mode !== "density") {
    drawWiggles(ctx, g, settings, view, { x0, y0, pw, ph, xScale, tScale, spacingPx }, ref, COLOURS.wiggle, settings.mode === "wiggle");
    if (second) {
      const pk2 = peaks(second);
      const ref2 = (t: number) => (settings.scaling === "trace" ? pk2.perTrace[t] : pk2.gather) || 1;
      drawWiggles(ctx, second, settings, view, { x0, y0, pw, ph, xScale, tScale, spacingPx }, ref2, COLOURS.second, false);
    }
  }

  // Mute lines and picks over the traces.
  if (overlays.mutes) {
    ctx.setLineDash([5, 4]);
    ctx.lineWidth = 1.5;
    ctx.strokeStyle = COLOURS.mute;
    for (const line of overlays.mutes) {
      ctx.beginPath();
      for (let i = 0; i < line.timesS.length && i < g.traces; i++) {
        const x = px(tracePosition(g, settings, i));
        const y = py(line.timesS[i]);
        if (i === 0) ctx.moveTo(x, y);
        else ctx.lineTo(x, y);
      }
      ctx.stroke();
    }
    ctx.setLineDash([]);
  }
  if (overlays.selectedTrace !== undefined && overlays.selectedTrace >= 0 && overlays.selectedTrace < g.traces) {
    const x = px(tracePosition(g, settings, overlays.selectedTrace));
    ctx.fillStyle = "rgba(123,63,160,0.12)";
    ctx.fillRect(x - 5, py(view.tMinS), 10, py(view.tMaxS) - py(view.tMinS));
  }
  if (overlays.picks) {
    ctx.lineWidth = 1.5;
    for (const p of overlays.picks) {
      if (p.traceIndex < 0 || p.traceIndex >= g.traces) continue;
      const x = px(tracePosition(g, settings, p.traceIndex));
      const y = py(p.timeS);
      ctx.strokeStyle = p.pending ? COLOURS.pickPending : p.hand ? COLOURS.pickHand : p.flagged ? COLOURS.pickFlagged : COLOURS.pick;
      ctx.beginPath();
      if (p.hand || p.pending) {
        // Hand picks as squares, automatic ones as crosses.
        ctx.rect(x - 4, y - 4, 8, 8);
      } else {
        ctx.moveTo(x - 4, y);
        ctx.lineTo(x + 4, y);
        ctx.moveTo(x, y - 4);
        ctx.lineTo(x, y + 4);
      }
      ctx.stroke();
    }
  }
  ctx.restore();

  drawAxes(ctx, g, settings, view, { x0, y0, pw, ph, px, py }, title);
  return performance.now() - started;
}

interface Frame {
  x0: number;
  y0: number;
  pw: number;
  ph: number;
  xScale: number;
  tScale: number;
}

function drawDensity(
  ctx: CanvasRenderingContext2D,
  g: GatherView,
  settings: DisplaySettings,
  view: ViewWindow,
  f: Frame & { dpr: number },
  ref: (t: number) => number,
): void {
  // Build the image at device resolution so it stays sharp on high-density screens.
  const w = Math.max(1, Math.round(f.pw * f.dpr));
  const h = Math.max(1, Math.round(f.ph * f.dpr));
  const image = ctx.createImageData(w, h);
  const pixels = new Uint32Array(image.data.buffer);
  // Column → nearest trace (or -1 where no trace is within half a spacing).
  const colTrace = new Int32Array(w).fill(-1);
  const colScale = new Float32Array(w);
  if (settings.spacing === "even") {
    for (let c = 0; c < w; c++) {
      const pos = view.xMin + ((c + 0.5) / w) * (view.xMax - view.xMin);
      const t = Math.round(pos);
      if (t >= 0 && t < g.traces) colTrace[c] = t;
    }
  } else {
    const order = Array.from({ length: g.traces }, (_, i) => i).sort((a, b) => g.offsetsM[a] - g.offsetsM[b]);
    let k = 0;
    for (let c = 0; c < w; c++) {
      const pos = view.xMin + ((c + 0.5) / w) * (view.xMax - view.xMin);
      while (k + 1 < order.length && Math.abs(g.offsetsM[order[k + 1]] - pos) <= Math.abs(g.offsetsM[order[k]] - pos)) k++;
      colTrace[c] = order[k];
    }
  }
  for (let c = 0; c < w; c++) if (colTrace[c] >= 0) colScale[c] = (settings.gain / ref(colTrace[c])) * 127.5;
  const rowSample = new Int32Array(h);
  for (let r = 0; r < h; r++) {
    const t = view.tMinS + ((r + 0.5) / h) * (view.tMaxS - view.tMinS);
    const s = Math.round((t - g.t0S) / g.dtS);
    rowSample[r] = s >= 0 && s < g.samples ? s : -1;
  }
  const white = 0xffffffff;
  for (let r = 0; r < h; r++) {
    const s = rowSample[r];
    const rowBase = r * w;
    for (let c = 0; c < w; c++) {
      const t = colTrace[c];
      if (t < 0 || s < 0) {
        pixels[rowBase + c] = white;
        continue;
      }
      let i = 127.5 + g.data[t * g.samples + s] * colScale[c];
      i = i < 0 ? 0 : i > 255 ? 255 : i;
      pixels[rowBase + c] = LUT[i | 0];
    }
  }
  // putImageData ignores the transform: place it in device pixels.
  ctx.save();
  ctx.setTransform(1, 0, 0, 1, 0, 0);
  ctx.putImageData(image, Math.round(f.x0 * f.dpr), Math.round(f.y0 * f.dpr));
  ctx.restore();
}

function drawWiggles(
  ctx: CanvasRenderingContext2D,
  g: GatherView,
  settings: DisplaySettings,
  view: ViewWindow,
  f: Frame & { spacingPx: number },
  ref: (t: number) => number,
  colour: string,
  fillPositive: boolean,
): void {
  const sFirst = Math.max(0, Math.floor((view.tMinS - g.t0S) / g.dtS));
  const sLast = Math.min(g.samples - 1, Math.ceil((view.tMaxS - g.t0S) / g.dtS));
  if (sLast < sFirst) return;
  const visible = sLast - sFirst + 1;
  const rows = Math.max(1, Math.round(f.ph));
  const perRow = visible > rows * 2; // more samples than pixels: one min/max pair per row
  const clipPx = settings.clip * f.spacingPx;
  const yOf = (s: number) => f.y0 + (g.t0S + s * g.dtS - view.tMinS) * f.tScale;
  ctx.lineWidth = 0.8;
  ctx.strokeStyle = colour;
  ctx.fillStyle = fillPositive ? COLOURS.fill : colour;
  for (let t = 0; t < g.traces; t++) {
    const base = f.x0 + (tracePosition(g, settings, t) - view.xMin) * f.xScale;
    if (base < f.x0 - f.spacingPx * (settings.clip + 1) || base > f.x0 + f.pw + f.spacingPx * (settings.clip + 1)) continue;
    const k = (settings.gain / ref(t)) * f.spacingPx;
    const row = t * g.samples;
    const dx = (v: number) => {
      const d = v * k;
      return d > clipPx ? clipPx : d < -clipPx ? -clipPx : d;
    };
    const line = new Path2D();
    const lobe = fillPositive ? new Path2D() : null;
    if (lobe) lobe.moveTo(base, yOf(sFirst));
    if (perRow) {
      const step = visible / rows;
      for (let r = 0; r < rows; r++) {
        const a = sFirst + Math.floor(r * step);
        const b = Math.min(sLast + 1, sFirst + Math.floor((r + 1) * step));
        let lo = Infinity;
        let hi = -Infinity;
        for (let s = a; s < b; s++) {
          const v = g.data[row + s];
          if (v < lo) lo = v;
          if (v > hi) hi = v;
        }
        const y = f.y0 + r;
        if (r === 0) line.moveTo(base + dx(lo), y);
        else line.lineTo(base + dx(lo), y);
        line.lineTo(base + dx(hi), y + 0.5);
        if (lobe) lobe.lineTo(base + Math.max(0, dx(hi)), y);
      }
    } else {
      for (let s = sFirst; s <= sLast; s++) {
        const x = base + dx(g.data[row + s]);
        const y = yOf(s);
        if (s === sFirst) line.moveTo(x, y);
        else line.lineTo(x, y);
        if (lobe) lobe.lineTo(Math.max(base, x), y);
      }
    }
    if (lobe) {
      lobe.lineTo(base, yOf(sLast));
      lobe.closePath();
      ctx.fill(lobe);
    }
    ctx.stroke(line);
  }
}

function drawAxes(
  ctx: CanvasRenderingContext2D,
  g: GatherView,
  settings: DisplaySettings,
  view: ViewWindow,
  f: { x0: number; y0: number; pw: number; ph: number; px: (p: number) => number; py: (t: number) => number },
  title?: string,
): void {
  ctx.strokeStyle = COLOURS.axis;
  ctx.fillStyle = COLOURS.axis;
  ctx.lineWidth = 1;
  ctx.font = "11px var(--font-plex-sans), system-ui, sans-serif";
  ctx.strokeRect(f.x0 + 0.5, f.y0 + 0.5, f.pw - 1, f.ph - 1);
  // Time axis, ms.
  const tRangeMs = (view.tMaxS - view.tMinS) * 1000;
  const tStep = niceStep(tRangeMs, Math.max(2, f.ph / 50));
  ctx.textAlign = "right";
  ctx.textBaseline = "middle";
  for (let ms = Math.ceil((view.tMinS * 1000) / tStep) * tStep; ms <= view.tMaxS * 1000 + 1e-9; ms += tStep) {
    const y = f.py(ms / 1000);
    ctx.beginPath();
    ctx.moveTo(f.x0 - 4, y);
    ctx.lineTo(f.x0, y);
    ctx.stroke();
    ctx.fillText(String(Math.round(ms * 100) / 100), f.x0 - 6, y);
  }
  ctx.save();
  ctx.translate(12, f.y0 + f.ph / 2);
  ctx.rotate(-Math.PI / 2);
  ctx.textAlign = "center";
  ctx.fillText("Time (ms)", 0, 0);
  ctx.restore();
  // Offset axis, m, along the top.
  ctx.textAlign = "center";
  ctx.textBaseline = "bottom";
  if (settings.spacing === "offset") {
    const step = niceStep(view.xMax - view.xMin, Math.max(2, f.pw / 70));
    for (let m = Math.ceil(view.xMin / step) * step; m <= view.xMax; m += step) {
      const x = f.px(m);
      ctx.beginPath();
      ctx.moveTo(x, f.y0 - 4);
      ctx.lineTo(x, f.y0);
      ctx.stroke();
      ctx.fillText(String(Math.round(m * 100) / 100), x, f.y0 - 6);
    }
  } else {
    const visible = view.xMax - view.xMin;
    const every = Math.max(1, Math.ceil(visible / Math.max(2, f.pw / 60)));
    for (let i = Math.max(0, Math.ceil(view.xMin)); i <= Math.min(g.traces - 1, Math.floor(view.xMax)); i++) {
      if (i % every !== 0) continue;
      const x = f.px(i);
      ctx.beginPath();
      ctx.moveTo(x, f.y0 - 4);
      ctx.lineTo(x, f.y0);
      ctx.stroke();
      ctx.fillText(String(Math.round(g.offsetsM[i] * 10) / 10), x, f.y0 - 6);
    }
  }
  ctx.textAlign = "left";
  ctx.textBaseline = "top";
  ctx.fillText(title ? `Offset (m) · ${title}` : "Offset (m)", f.x0, 4);
}
