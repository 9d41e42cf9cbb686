/**
 * How close an inverted model of line QM-1 comes to the hidden true ground of the invented
 * Quillmoor scenario: where the hollow is, how wide and how deep, how slow inside, and how well
 * the background is recovered. Only the demo can do this (a real survey has no true model).
 *
 *   npx tsx examples/quillmoor/assess-inversion.ts [run id]   (default: the latest run of the
 *                                                              quillmoor-qm1-inversion pipeline)
 *
 * The hollow in the inverted model is taken as the cells whose Vs is at least 20 % below the true
 * background at their depth (the background is known here; the threshold is a choice of this
 * demo), and the slow body is the largest group of such cells that touch each other (scattered
 * slow cells elsewhere, e.g. at the poorly covered ends of the line, are not the hollow): its
 * centre is the Vs-deficit-weighted mean x of that body; its width the extent of its cells at
 * 0.5 m depth around the centre, bridging gaps of up to 1 m (the ground right under a source point
 * changes little, because the update fades out near every source: one slower-than-threshold column
 * under a source does not split the body in two); its base the deepest such cell in the columns
 * near the centre.
 */
import path from "node:path";
import { pathToFileURL } from "node:url";
import type { ElasticModel } from "../../pipeline/types";
import { QUILLMOOR_HOLLOW, QUILLMOOR_LAYERS } from "./true-ground";
import { buildModel, shapeContains } from "../../pipeline/kernels/fd/model-grid";

export interface InversionAssessment {
  /** Deficit-weighted centre of the slow body, m (true 27). */
  centreXM: number | null;
  /** Width of the slow body at 0.5 m depth, m (true about 6). */
  widthM: number | null;
  /** Deepest slow cell within ±1.5 m of the centre, m (true 3.5). */
  baseDepthM: number | null;
  /** Mean Vs inside the true hollow, m/s (true 90). */
  meanVsInHollowMps: number;
  /** Mean relative error of Vs outside the hollow, x 6–48 m, all depths of the model, %. */
  backgroundErrorPercent: number;
  /** Largest mean relative error of Vs in any 1 m depth band outside the hollow, x 6–48 m, %. */
  worstBandErrorPercent: number;
}

/** Widest gap between slow cells that still counts as one body, m (the width's rule above). */
export const BRIDGED_GAP_M = 1;

/**
 * Extent (m) of the slow cells in one row that are joined to the centre column, where gaps of up
 * to `gapCells` non-slow cells are bridged; 0 when no slow cell lies within the gap of the centre.
 */
export function slowExtentM(slow: Uint8Array, nx: number, row: number, centre: number, gapCells: number, h: number): number {
  const at = (i: number) => i >= 0 && i < nx && slow[row * nx + i] === 1;
  let lo = -1;
  let hi = -1;
  for (let d = 0; d <= gapCells && lo < 0; d++) {
    if (at(centre - d)) lo = hi = centre - d;
    else if (at(centre + d)) lo = hi = centre + d;
  }
  if (lo < 0) return 0;
  for (let i = lo - 1, gap = 0; i >= 0 && gap <= gapCells; i--) {
    if (at(i)) {
      lo = i;
      gap = 0;
    } else gap++;
  }
  for (let i = hi + 1, gap = 0; i < nx && gap <= gapCells; i++) {
    if (at(i)) {
      hi = i;
      gap = 0;
    } else gap++;
  }
  return (hi - lo + 1) * h;
}

/**
 * The slow body: of the groups of cells at least `threshold` below the background that touch each
 * other (sides or corners), the one with the largest summed deficit; 1 marks its cells.
 */
export function largestSlowBody(deficit: Float64Array, nx: number, nz: number, threshold: number): Uint8Array {
  const label = new Int32Array(nx * nz).fill(-1);
  const sums: number[] = [];
  const stack: number[] = [];
  for (let start = 0; start < label.length; start++) {
    if (label[start] !== -1 || !(deficit[start] >= threshold)) continue;
    const id = sums.length;
    let sum = 0;
    label[start] = id;
    stack.push(start);
    while (stack.length > 0) {
      const k = stack.pop()!;
      sum += deficit[k];
      const i = k % nx;
      const j = (k - i) / nx;
      for (let dj = -1; dj <= 1; dj++) {
        for (let di = -1; di <= 1; di++) {
          const ii = i + di;
          const jj = j + dj;
          if (ii < 0 || ii >= nx || jj < 0 || jj >= nz) continue;
          const q = jj * nx + ii;
          if (label[q] === -1 && deficit[q] >= threshold) {
            label[q] = id;
            stack.push(q);
          }
        }
      }
    }
    sums.push(sum);
  }
  const out = new Uint8Array(nx * nz);
  if (sums.length === 0) return out;
  const best = sums.indexOf(Math.max(...sums));
  for (let k = 0; k < out.length; k++) if (label[k] === best) out[k] = 1;
  return out;
}

/** Compares an inverted model with the true ground on the model's own grid. */
export function assessInversion(m: ElasticModel): InversionAssessment {
  const grid = { originX: m.originX, originZ: m.originZ, spacingM: m.spacingM, nx: m.nx, nz: m.nz };
  const background = buildModel(grid, QUILLMOOR_LAYERS, []);
  const h = m.spacingM;
  const deficit = new Float64Array(m.nx * m.nz);
  for (let k = 0; k < deficit.length; k++) deficit[k] = 1 - m.vs[k] / background.vs[k];
  const slow = largestSlowBody(deficit, m.nx, m.nz, 0.2);
  let wSum = 0;
  let xSum = 0;
  for (let j = 0; j < m.nz; j++) {
    for (let i = 0; i < m.nx; i++) {
      const k = j * m.nx + i;
      if (slow[k]) {
        wSum += deficit[k];
        xSum += deficit[k] * (m.originX + i * h);
      }
    }
  }
  const centreXM = wSum > 0 ? xSum / wSum : null;
  let widthM: number | null = null;
  let baseDepthM: number | null = null;
  if (centreXM !== null) {
    const row = Math.min(m.nz - 1, Math.round((0.5 - m.originZ) / h));
    const ci = Math.round((centreXM - m.originX) / h);
    widthM = slowExtentM(slow, m.nx, row, ci, Math.round(BRIDGED_GAP_M / h), h);
    const reach = Math.round(1.5 / h);
    for (let j = 0; j < m.nz; j++) {
      for (let i = Math.max(0, ci - reach); i <= Math.min(m.nx - 1, ci + reach); i++) {
        if (slow[j * m.nx + i]) baseDepthM = m.originZ + (j + 1) * h;
      }
    }
  }
  let inSum = 0;
  let inCount = 0;
  let errSum = 0;
  let errCount = 0;
  const bands = new Map<number, { sum: number; count: number }>();
  for (let j = 0; j < m.nz; j++) {
    const z = m.originZ + j * h;
    for (let i = 0; i < m.nx; i++) {
      const x = m.originX + i * h;
      const k = j * m.nx + i;
      if (shapeContains(QUILLMOOR_HOLLOW, x, z)) {
        inSum += m.vs[k];
        inCount++;
        continue;
      }
      if (x < 6 || x > 48) continue;
      const e = Math.abs(m.vs[k] / background.vs[k] - 1);
      errSum += e;
      errCount++;
      const b = Math.floor(z);
      const band = bands.get(b) ?? { sum: 0, count: 0 };
      band.sum += e;
      band.count++;
      bands.set(b, band);
    }
  }
  let worst = 0;
  for (const b of bands.values()) worst = Math.max(worst, b.sum / b.count);
  return {
    centreXM,
    widthM,
    baseDepthM,
    meanVsInHollowMps: inCount > 0 ? inSum / inCount : Number.NaN,
    backgroundErrorPercent: errCount > 0 ? (100 * errSum) / errCount : Number.NaN,
    worstBandErrorPercent: 100 * worst,
  };
}

/** The assessment as lines for a terminal, with the scenario's targets beside each figure. */
export function describeAssessment(a: InversionAssessment): string[] {
  const f = (v: number | null, d = 2) => (v === null || !Number.isFinite(v) ? "none" : v.toFixed(d));
  return [
    `hollow centre      ${f(a.centreXM)} m    (true 27 m; target within 1 m)`,
    `hollow width       ${f(a.widthM)} m    (true 5.94 m at 0.5 m depth, gaps up to ${BRIDGED_GAP_M} m bridged; target within 1.5 m of 6 m)`,
    `hollow base        ${f(a.baseDepthM)} m    (true 3.5 m; target within 1 m)`,
    `mean Vs in hollow  ${f(a.meanVsInHollowMps, 0)} m/s  (true 90 m/s; target at most 120 m/s)`,
    `background Vs      ${f(a.backgroundErrorPercent, 1)} % mean error, worst 1 m band ${f(a.worstBandErrorPercent, 1)} %  (x 6–48 m; target within 10 %)`,
  ];
}

export interface StageMisfit {
  stage: string;
  startMisfit: number;
  endMisfit: number;
  iterations: number;
  /** The stage's start measured with the last stage's wavelet, before a re-estimated one (when recorded). */
  startWithLastWavelet?: number;
}

/**
 * First and last misfit of each stage, from the inversion's misfit series (points grouped by
 * stage), with the start measured with the last stage's wavelet from `withLastWavelet` (the
 * series "misfit-with-last-wavelet") where there is one.
 */
export function stageMisfits(points: Array<{ x: number; y: number; group?: string }>, withLastWavelet: Array<{ y: number; group?: string }> = []): StageMisfit[] {
  const byStage = new Map<string, Array<{ x: number; y: number }>>();
  for (const p of points) {
    const key = p.group ?? "";
    (byStage.get(key) ?? byStage.set(key, []).get(key)!).push(p);
  }
  return [...byStage].map(([stage, pts]) => {
    const sorted = [...pts].sort((a, b) => a.x - b.x);
    const mark = withLastWavelet.find((p) => (p.group ?? "") === stage);
    return { stage, startMisfit: sorted[0].y, endMisfit: sorted[sorted.length - 1].y, iterations: sorted.length - 1, ...(mark ? { startWithLastWavelet: mark.y } : {}) };
  });
}

/** Each stage's misfit reduction within the stage (the target is judged on the measure table below). */
export function describeStageMisfits(stages: StageMisfit[]): string[] {
  return stages.map(
    (s) =>
      `misfit ${s.stage.padEnd(16)} ${s.startMisfit.toFixed(1)} → ${s.endMisfit.toFixed(1)} in ${s.iterations} iterations: ${((100 * s.endMisfit) / s.startMisfit).toFixed(0)} % of the stage's start` +
      (s.startWithLastWavelet !== undefined ? ` (${s.startWithLastWavelet.toFixed(1)} at its start with the last stage's wavelet)` : ""),
  );
}

export interface MeasureRow {
  stage: number;
  lowPassHz: number;
  measure: string;
  startModelMisfit: number;
  finalModelMisfit: number;
  ratio: number;
}

/** The inversion's measure table: the final model against the starting model under each stage's measure. */
export function describeMeasureTable(rows: MeasureRow[]): string[] {
  return rows.map(
    (r) =>
      `stage ${r.stage} measure (${r.lowPassHz} Hz, ${r.measure}): starting model ${r.startModelMisfit.toFixed(1)}, final model ${r.finalModelMisfit.toFixed(1)}: ${(100 * r.ratio).toFixed(0)} % of the start  (target at most 25 %)`,
  );
}

if (process.argv[1] && import.meta.url === pathToFileURL(path.resolve(process.argv[1])).href) {
  const { getDb, closeDb } = await import("../../db/client");
  const { getRun, listRuns } = await import("../../db/queries/runs");
  const { readArtifactSync } = await import("../../pipeline/artifact-store");
  const db = getDb();
  const arg = process.argv[2];
  // The given run, else the latest run of the example whose inversion step finished.
  const candidates = arg ? [Number(arg)] : listRuns(db, { pipelineName: "quillmoor-qm1-inversion", pageSize: 20 }).rows.map((r) => r.id);
  let run: ReturnType<typeof getRun> = null;
  for (const id of candidates) {
    const r = getRun(db, id);
    if (r?.steps.some((s) => s.stepId === "waveform-inversion" && s.status === "succeeded")) {
      run = r;
      break;
    }
  }
  const step = run?.steps.find((s) => s.stepId === "waveform-inversion");
  closeDb();
  if (!run || !step?.outputs.model) {
    process.stderr.write(`assess-inversion: ${arg ? `run ${arg} has` : "there is"} no finished waveform inversion to assess\n`);
    process.exit(2);
  }
  const model = readArtifactSync(step.outputs.model) as ElasticModel;
  process.stdout.write(`Run ${run.id}: the inverted model against the hidden true ground (invented demo)\n`);
  for (const line of describeAssessment(assessInversion(model))) process.stdout.write(`  ${line}\n`);
  const misfit = step.series.find((s) => s.name === "misfit");
  const marks = step.series.find((s) => s.name === "misfit-with-last-wavelet")?.points ?? [];
  if (misfit) for (const line of describeStageMisfits(stageMisfits(misfit.points, marks))) process.stdout.write(`  ${line}\n`);
  const report = step.outputs.report ? (readArtifactSync(step.outputs.report) as { data?: { measureTable?: MeasureRow[] } }) : null;
  const table = report?.data?.measureTable ?? [];
  if (table.length > 0) for (const line of describeMeasureTable(table)) process.stdout.write(`  ${line}\n`);
}
