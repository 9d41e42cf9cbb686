/**
 * Pure helpers of the inversion view: stages from the live misfit series, the iterations a
 * slider walks through, model differences, and traces as a stage's misfit measure sees them.
 * No React, no DOM: unit-tested in tests/app/inversion-data.test.ts.
 */
import { traceEnvelopes } from "@/pipeline/kernels/hilbert";

/** A point of a step's live series (x = global iteration, group = "stage N (F Hz)"). */
export interface SeriesPoint {
  x: number;
  y: number;
  group?: string;
}

/** Series a step records only to mark points on another curve (the inversion's misfit curve draws them). */
export const MARKER_SERIES: ReadonlySet<string> = new Set(["misfit-with-last-wavelet"]);

/** One stage of the misfit curve. */
export interface StageSegment {
  /** Series group, e.g. "stage 2 (30 Hz)". */
  group: string;
  /** Stage number from the group name (1-based), or the order of appearance. */
  stage: number;
  /** Low-pass corner from the group name, Hz (null when the name does not say). */
  lowPassHz: number | null;
  points: Array<{ x: number; y: number }>;
  startX: number;
  endX: number;
  /**
   * Where this stage starts against the previous stage's last point: the misfit jumps there,
   * because the new stage measures a wider band (or another measure) on the same model.
   */
  jump: { x: number; from: number; to: number; withLastWavelet?: number } | null;
}

const GROUP = /stage\s+(\d+)(?:\s*\(([\d.]+)\s*Hz\))?/i;

/**
 * Splits series points into stages, in order of first appearance. Points of one group keep
 * their order (sorted by x). Each stage after the first records the jump from the previous
 * stage's last value to its own first value (the frequency-continuation step, Bunks et al. 1995),
 * and, from `withLastWavelet` (the step's series "misfit-with-last-wavelet", same groups), its
 * start measured with the last stage's wavelet before a re-estimated one replaced it.
 */
export function stageSegments(points: readonly SeriesPoint[], withLastWavelet: readonly SeriesPoint[] = []): StageSegment[] {
  const before = new Map<string, number>();
  for (const p of withLastWavelet) if (p.group && Number.isFinite(p.y)) before.set(p.group, p.y);
  const order: string[] = [];
  const byGroup = new Map<string, Array<{ x: number; y: number }>>();
  for (const p of points) {
    if (!Number.isFinite(p.x) || !Number.isFinite(p.y)) continue;
    const g = p.group ?? "stage 1";
    if (!byGroup.has(g)) {
      byGroup.set(g, []);
      order.push(g);
    }
    byGroup.get(g)!.push({ x: p.x, y: p.y });
  }
  const out: StageSegment[] = [];
  order.forEach((g, i) => {
    const pts = byGroup.get(g)!.slice().sort((a, b) => a.x - b.x);
    const m = GROUP.exec(g);
    const prev = out.at(-1);
    const last = prev?.points.at(-1);
    out.push({
      group: g,
      stage: m ? Number(m[1]) : i + 1,
      lowPassHz: m && m[2] !== undefined ? Number(m[2]) : null,
      points: pts,
      startX: pts[0].x,
      endX: pts.at(-1)!.x,
      jump: last ? { x: pts[0].x, from: last.y, to: pts[0].y, ...(before.has(g) ? { withLastWavelet: before.get(g)! } : {}) } : null,
    });
  });
  return out;
}

/** Meta of a recorded iteration (as the inversion step writes it). */
export interface IterationMeta {
  stage: number;
  stageIteration: number;
  iteration: number;
  misfit: number;
  stepLength: number;
  lowPassHz: number;
  measure: string;
  forwardSolves?: number;
  wallS?: number;
}

/** An intermediate result as the intermediates route lists it. */
export interface IntermediateItem {
  kind: string;
  index: number;
  label: string | null;
  hash: string;
  meta: Record<string, unknown> | null;
}

/** One position of the iteration slider: iteration 0 is the starting model. */
export interface IterationFrame {
  iteration: number;
  modelHash: string;
  gradientHash: string | null;
  meta: IterationMeta | null;
}

function asMeta(m: Record<string, unknown> | null, index: number): IterationMeta | null {
  if (!m) return null;
  const num = (k: string) => (typeof m[k] === "number" ? (m[k] as number) : NaN);
  return {
    stage: num("stage"),
    stageIteration: num("stageIteration"),
    iteration: Number.isFinite(num("iteration")) ? num("iteration") : index,
    misfit: num("misfit"),
    stepLength: num("stepLength"),
    lowPassHz: num("lowPassHz"),
    measure: typeof m.measure === "string" ? m.measure : "",
    forwardSolves: Number.isFinite(num("forwardSolves")) ? num("forwardSolves") : undefined,
    wallS: Number.isFinite(num("wallS")) ? num("wallS") : undefined,
  };
}

/**
 * The frames the slider walks through: the starting model (iteration 0, when its hash is
 * known), then every recorded "model" intermediate by index, each with the gradient recorded
 * under the same index (or null).
 */
export function iterationFrames(startHash: string | null, items: readonly IntermediateItem[]): IterationFrame[] {
  const gradients = new Map(items.filter((i) => i.kind === "gradient").map((i) => [i.index, i.hash]));
  const models = items.filter((i) => i.kind === "model").sort((a, b) => a.index - b.index);
  const frames: IterationFrame[] = startHash ? [{ iteration: 0, modelHash: startHash, gradientHash: null, meta: null }] : [];
  for (const m of models) {
    if (m.index === 0 && startHash) continue;
    frames.push({ iteration: m.index, modelHash: m.hash, gradientHash: gradients.get(m.index) ?? null, meta: asMeta(m.meta, m.index) });
  }
  return frames;
}

/** Smallest and largest finite value (NaN, NaN for none). */
export function valueRange(values: ArrayLike<number>): { lo: number; hi: number } {
  let lo = Infinity;
  let hi = -Infinity;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (!Number.isFinite(v)) continue;
    if (v < lo) lo = v;
    if (v > hi) hi = v;
  }
  return lo <= hi ? { lo, hi } : { lo: NaN, hi: NaN };
}

/** Largest |value| (0 for none): the half-width of a symmetric, diverging colour bar. */
export function symmetricLimit(values: ArrayLike<number>): number {
  let m = 0;
  for (let i = 0; i < values.length; i++) {
    const a = Math.abs(values[i]);
    if (Number.isFinite(a) && a > m) m = a;
  }
  return m;
}

/**
 * Model minus starting model, cell by cell: in the parameter's unit, and in per cent of the
 * starting value (NaN where the starting value is 0).
 */
export function modelDifference(model: ArrayLike<number>, start: ArrayLike<number>): { absolute: Float32Array; percent: Float32Array } {
  if (model.length !== start.length) throw new RangeError(`model has ${model.length} cells, the starting model ${start.length}`);
  const absolute = new Float32Array(model.length);
  const percent = new Float32Array(model.length);
  for (let i = 0; i < model.length; i++) {
    const d = model[i] - start[i];
    absolute[i] = d;
    percent[i] = start[i] !== 0 ? (100 * d) / start[i] : NaN;
  }
  return { absolute, percent };
}

/** Values of column x (nearest grid column) from top to bottom, with depths. */
export function depthProfile(
  values: ArrayLike<number>,
  grid: { nx: number; nz: number; spacingM: number; originX: number; originZ: number },
  xM: number,
): { x: number; depths: number[]; values: number[] } {
  const ix = Math.max(0, Math.min(grid.nx - 1, Math.round((xM - grid.originX) / grid.spacingM)));
  const depths: number[] = [];
  const out: number[] = [];
  for (let iz = 0; iz < grid.nz; iz++) {
    depths.push(grid.originZ + iz * grid.spacingM);
    out.push(values[iz * grid.nx + ix]);
  }
  return { x: grid.originX + ix * grid.spacingM, depths, values: out };
}

/**
 * Each trace divided by its L2 norm over the window [first, end) (flat `[trace][sample]`); a
 * trace with no energy there stays zero, as in pipeline/kernels/misfit-adjoint.ts.
 */
export function unitNormTraces(data: ArrayLike<number>, traceCount: number, sampleCount: number, first = 0, end = sampleCount): Float32Array {
  if (data.length !== traceCount * sampleCount) throw new RangeError(`data has ${data.length} samples, expected ${traceCount} × ${sampleCount}`);
  const a = Math.max(0, Math.min(sampleCount, first));
  const b = Math.max(a, Math.min(sampleCount, end));
  const out = new Float32Array(traceCount * sampleCount);
  for (let t = 0; t < traceCount; t++) {
    const base = t * sampleCount;
    let e = 0;
    for (let k = a; k < b; k++) e += data[base + k] * data[base + k];
    if (e <= 0) continue;
    const inv = 1 / Math.sqrt(e);
    for (let k = a; k < b; k++) out[base + k] = data[base + k] * inv;
  }
  return out;
}

/** What a measure compares, trace by trace, and the residual it minimises. */
export interface MeasuredTraces {
  observed: Float32Array;
  synthetic: Float32Array;
  /** synthetic − observed, as the measure sees them. */
  residual: Float32Array;
  /** One line saying what is drawn. */
  explanation: string;
}

/**
 * Observed and synthetic traces as the inversion's misfit measure sees them over the window
 * [first, end) (pipeline/kernels/misfit-adjoint.ts): raw samples for least squares; per-trace
 * unit-norm traces for trace-normalised least squares and normalised correlation (Choi &
 * Alkhalifah 2012: ½‖ŝ − d̂‖² = 1 − ŝ·d̂); envelopes of the analytic signal for the envelope
 * measure (Bozdağ et al. 2011). Samples outside the window are zero; traces the stage leaves
 * out (`compared[t]` false, e.g. outside its offset range) get a zero residual.
 */
export function measuredTraces(
  measure: string,
  observed: ArrayLike<number>,
  synthetic: ArrayLike<number>,
  traceCount: number,
  sampleCount: number,
  first = 0,
  end = sampleCount,
  compared?: ArrayLike<boolean>,
): MeasuredTraces {
  const n = traceCount * sampleCount;
  if (observed.length !== n || synthetic.length !== n) {
    throw new RangeError(`observed has ${observed.length} and synthetic ${synthetic.length} samples, expected ${traceCount} × ${sampleCount}`);
  }
  const a = Math.max(0, Math.min(sampleCount, first));
  const b = Math.max(a, Math.min(sampleCount, end));
  const windowed = (src: ArrayLike<number>) => {
    const out = new Float32Array(n);
    for (let t = 0; t < traceCount; t++) for (let k = a; k < b; k++) out[t * sampleCount + k] = src[t * sampleCount + k];
    return out;
  };
  let o: Float32Array;
  let s: Float32Array;
  let explanation: string;
  if (measure === "trace-normalised-least-squares" || measure === "normalised-correlation") {
    o = unitNormTraces(observed, traceCount, sampleCount, a, b);
    s = unitNormTraces(synthetic, traceCount, sampleCount, a, b);
    explanation =
      measure === "normalised-correlation"
        ? "Normalised correlation compares shapes, not amplitudes: each trace is divided by its own norm over the stage's window (unit-norm traces), and the residual is the difference of those."
        : "Trace-normalised least squares: each trace divided by its own norm over the stage's window (unit-norm traces); the residual is their difference.";
  } else if (measure === "envelope") {
    // Envelopes on the whole trace, then windowed, as in pipeline/kernels/misfit.ts.
    o = windowed(Float32Array.from(traceEnvelopes(observed, traceCount, sampleCount)));
    s = windowed(Float32Array.from(traceEnvelopes(synthetic, traceCount, sampleCount)));
    explanation = "Envelope measure: the envelopes of the analytic signal are compared; the residual is their difference.";
  } else {
    o = windowed(observed);
    s = windowed(synthetic);
    explanation = "Least squares: samples compared as they are; the residual is synthetic minus observed.";
  }
  const residual = new Float32Array(n);
  for (let i = 0; i < n; i++) residual[i] = s[i] - o[i];
  if (compared) for (let t = 0; t < traceCount; t++) if (!compared[t]) residual.fill(0, t * sampleCount, (t + 1) * sampleCount);
  return { observed: o, synthetic: s, residual, explanation };
}

/** Sample window [first, end) of a stage's time window in ms after the source instant. */
export function windowSamples(
  stage: { windowStartMs?: number; windowEndMs?: number } | undefined,
  startTimeS: number,
  sampleIntervalS: number,
  sampleCount: number,
): { first: number; end: number } {
  if (!stage) return { first: 0, end: sampleCount };
  const first = Math.max(0, Math.round(((stage.windowStartMs ?? 0) / 1000 - startTimeS) / sampleIntervalS));
  const end = stage.windowEndMs === undefined ? sampleCount : Math.min(sampleCount, Math.round((stage.windowEndMs / 1000 - startTimeS) / sampleIntervalS) + 1);
  return { first: Math.min(first, sampleCount), end: Math.max(Math.min(first, sampleCount), end) };
}
