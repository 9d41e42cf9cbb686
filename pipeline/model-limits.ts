/**
 * Size limits of model grids, checked before anything is allocated: a grid too large for the
 * machine is refused with a message that names the setting to change, the limit and the memory
 * it would take, instead of failing inside a typed-array constructor ("Invalid typed array
 * length") or running the machine out of memory.
 *
 * The limit is in cells: `TRACEWRIGHT_MAX_MODEL_CELLS` (default 20 million, about a 5 km × 1 km
 * section at 0.5 m; the largest grid the solver runs needs 10 arrays of 4 bytes per cell and
 * worker, 800 MB per worker at the default). Memory beyond the grid arrays (stored forward
 * wavefields of the inversion, snapshots) counts against the memory a grid at the cell limit would
 * take, per worker.
 */
import { planLayout, type WaveMode } from "./kernels/fd/layout";
import { StepInputError } from "./step";

/** Environment variable holding the largest number of model cells a step accepts. */
export const MAX_MODEL_CELLS_ENV = "TRACEWRIGHT_MAX_MODEL_CELLS";
/** Default cell limit. */
export const DEFAULT_MAX_MODEL_CELLS = 20_000_000;
/** Arrays of 4 bytes per cell the P-SV solver keeps (5 wavefields, 5 material arrays). */
export const SOLVER_ARRAYS_PER_CELL = 10;

/** The cell limit in force: the environment's value, else the default. */
export function maxModelCells(env: Record<string, string | undefined> = process.env): number {
  const raw = env[MAX_MODEL_CELLS_ENV];
  if (raw === undefined || raw.trim() === "") return DEFAULT_MAX_MODEL_CELLS;
  const n = Number(raw);
  if (!Number.isInteger(n) || n < 64) {
    throw new StepInputError(`${MAX_MODEL_CELLS_ENV} must be a whole number of cells of at least 64, got "${raw}"`, MAX_MODEL_CELLS_ENV);
  }
  return n;
}

/** Memory per worker that the cell limit allows: a solver grid at the limit, bytes. */
export function maxModelBytesPerWorker(limitCells = maxModelCells()): number {
  return limitCells * SOLVER_ARRAYS_PER_CELL * 4;
}

/** What a step is about to allocate for one model grid. */
export interface ModelFootprint {
  /** What the grid is, for the message, e.g. "the model grid" or "the solver grid (model plus 20 absorbing cells)". */
  what: string;
  nx: number;
  nz: number;
  /** Bytes per worker (or in the step's own thread when `workers` is 1). */
  bytesPerWorker: number;
  /** Workers holding one copy each. */
  workers: number;
  /** How the bytes are made up, e.g. "10 arrays × cells × 4 bytes + stored wavefields 1.2 GB". */
  makeup: string;
}

/** Bytes as a short figure with a unit (decimal units: MB = 10⁶ bytes). */
export function formatBytes(bytes: number): string {
  if (bytes >= 1e9) return `${(bytes / 1e9).toFixed(1)} GB`;
  if (bytes >= 1e6) return `${(bytes / 1e6).toFixed(0)} MB`;
  return `${(bytes / 1e3).toFixed(0)} kB`;
}

/**
 * Refuses a grid beyond the cell limit, or whose memory per worker exceeds what the limit allows,
 * with a StepInputError on `setting` whose message names the grid, the limit and the memory, and
 * ends with `remedy` (which settings to change).
 */
export function checkModelFootprint(f: ModelFootprint, setting: string, remedy: string, limitCells = maxModelCells()): void {
  const cells = f.nx * f.nz;
  const total = f.bytesPerWorker * f.workers;
  const perWorker = f.workers > 1 ? ` per worker, ${formatBytes(total)} for ${f.workers} workers` : "";
  const need = `about ${formatBytes(f.bytesPerWorker)}${perWorker} (${f.makeup})`;
  if (!(cells <= limitCells)) {
    throw new StepInputError(
      `${f.what} of ${f.nx} × ${f.nz} = ${cells.toLocaleString("en-GB")} cells exceeds the limit of ${limitCells.toLocaleString("en-GB")} cells ` +
        `(${MAX_MODEL_CELLS_ENV}; up to ${formatBytes(maxModelBytesPerWorker(limitCells))} per worker); it would need ${need}. ${remedy}`,
      setting,
    );
  }
  const allowed = maxModelBytesPerWorker(limitCells);
  if (!(f.bytesPerWorker <= allowed)) {
    throw new StepInputError(
      `${f.what} of ${f.nx} × ${f.nz} cells would need ${need}, more than the ${formatBytes(allowed)} per worker that the limit of ` +
        `${limitCells.toLocaleString("en-GB")} cells allows (${MAX_MODEL_CELLS_ENV}). ${remedy}`,
      setting,
    );
  }
}

/**
 * The solver's footprint for a model: the buffer of one simulation (wavefields, material arrays
 * and absorbing strips on the grid padded by `pmlCells`, as pipeline/kernels/fd/layout.ts plans
 * it) plus `extraBytes` per worker. Null for grids under 8 × 8, which the solver refuses itself.
 */
export function solverFootprint(
  model: { nx: number; nz: number },
  opts: { mode: WaveMode; pmlCells: number; freeSurface: boolean; workers: number; extraBytes?: number; extraLabel?: string },
): ModelFootprint | null {
  if (!(model.nx >= 8 && model.nz >= 8 && Number.isInteger(model.nx) && Number.isInteger(model.nz))) return null;
  const layout = planLayout({ mode: opts.mode, modelNx: model.nx, modelNz: model.nz, pmlCells: opts.pmlCells, freeSurface: opts.freeSurface });
  const extra = opts.extraBytes ?? 0;
  return {
    what: `the solver grid of the ${model.nx} × ${model.nz} model (with ${opts.pmlCells} absorbing cells)`,
    nx: layout.nx,
    nz: layout.nrows,
    bytesPerWorker: layout.totalBytes + extra,
    workers: Math.max(1, opts.workers),
    makeup: `solver buffer ${formatBytes(layout.totalBytes)}${extra > 0 ? ` + ${opts.extraLabel ?? "stored fields"} ${formatBytes(extra)}` : ""}`,
  };
}

/** The remedy named for a model too large to simulate: the grid of the step that built it. */
export const MODEL_TOO_LARGE_REMEDY = "Build the model on a coarser grid (build-model grid.spacingM) or a smaller one (grid.depthM, grid.widthM or spreadMarginM), or use fewer pmlCells.";
