/**
 * Solver bench: cell updates per second of the elastic finite-difference kernel on a homogeneous
 * model, P-SV and SH, with one worker (one shot) and with all workers (one shot each, run at the
 * same time). Prints nothing; `tracewright bench` prints the figures (see formatSolverBench).
 */
import { createWorkerPool, defaultWorkerCount } from "../workers/pool";
import type { WaveMode } from "../kernels/fd/layout";

/** Options of {@link benchSolver}. */
export interface SolverBenchOptions {
  /** Model grid, cells. Default 1000 × 400. */
  nx?: number;
  nz?: number;
  /** Timed steps per shot. Default 300. */
  steps?: number;
  /** Absorbing thickness, cells. Default 20. */
  pmlCells?: number;
  /** Stress-free top. Default true. */
  freeSurface?: boolean;
  /** Workers for the parallel figure. Default all cores (TRACEWRIGHT_WORKERS when set). */
  workers?: number;
  /** Modes to measure. Default both. */
  modes?: WaveMode[];
}

/** One measured figure. */
export interface SolverBenchFigure {
  mode: WaveMode;
  workers: number;
  /** Shots run at the same time (one per worker). */
  shots: number;
  /** Model-grid cell updates per second, all shots together (absorbing cells not counted). */
  cellUpdatesPerSecond: number;
  /** The same counting the absorbing strips too. */
  computationalCellUpdatesPerSecond: number;
  /** Longest timed span of the shots, s. */
  seconds: number;
}

/** Result of {@link benchSolver}. */
export interface SolverBenchResult {
  nx: number;
  nz: number;
  steps: number;
  pmlCells: number;
  freeSurface: boolean;
  figures: SolverBenchFigure[];
  /** All-worker figure divided by the one-worker figure, per mode. */
  speedup: Partial<Record<WaveMode, number>>;
}

async function measure(workers: number, o: Required<Omit<SolverBenchOptions, "modes" | "workers">>, modes: WaveMode[]) {
  const pool = createWorkerPool(workers);
  const figures: SolverBenchFigure[] = [];
  try {
    // Start every thread and compile the kernel before timing.
    await Promise.all(
      Array.from({ length: workers }, () => pool.run("solverBenchTask", { mode: "sh", nx: 64, nz: 64, steps: 50, pmlCells: 10, freeSurface: true })),
    );
    for (const mode of modes) {
      const runs = await Promise.all(
        Array.from({ length: workers }, () =>
          pool.run("solverBenchTask", { mode, nx: o.nx, nz: o.nz, steps: o.steps, pmlCells: o.pmlCells, freeSurface: o.freeSurface }),
        ),
      );
      const seconds = Math.max(...runs.map((r) => r.seconds));
      figures.push({
        mode,
        workers,
        shots: workers,
        cellUpdatesPerSecond: (workers * o.nx * o.nz * o.steps) / seconds,
        computationalCellUpdatesPerSecond: (workers * runs[0].computationalCells * o.steps) / seconds,
        seconds,
      });
    }
  } finally {
    await pool.close();
  }
  return figures;
}

/** Measures the solver. Figures come from the WebAssembly kernel running in worker threads. */
export async function benchSolver(opts: SolverBenchOptions = {}): Promise<SolverBenchResult> {
  const o = {
    nx: opts.nx ?? 1000,
    nz: opts.nz ?? 400,
    steps: opts.steps ?? 300,
    pmlCells: opts.pmlCells ?? 20,
    freeSurface: opts.freeSurface ?? true,
  };
  for (const [k, v] of Object.entries(o)) {
    if (typeof v === "number" && (!Number.isInteger(v) || v < 0)) throw new RangeError(`${k} must be a non-negative integer, got ${v}`);
  }
  const modes = opts.modes ?? ["psv", "sh"];
  const workers = opts.workers ?? defaultWorkerCount();
  const one = await measure(1, o, modes);
  const all = workers > 1 ? await measure(workers, o, modes) : [];
  const speedup: Partial<Record<WaveMode, number>> = {};
  for (const f of all) {
    const base = one.find((x) => x.mode === f.mode);
    if (base) speedup[f.mode] = f.cellUpdatesPerSecond / base.cellUpdatesPerSecond;
  }
  return { ...o, figures: [...one, ...all], speedup };
}

/** Lines for a terminal: one per figure, cell updates in millions per second. */
export function formatSolverBench(r: SolverBenchResult): string[] {
  const lines = [
    `solver: ${r.nx} × ${r.nz} cells, ${r.steps} steps, PML ${r.pmlCells} cells, ${r.freeSurface ? "free surface" : "absorbing top"}`,
  ];
  for (const f of r.figures) {
    lines.push(
      `  ${f.mode === "psv" ? "P-SV" : "SH  "}  ${f.workers} worker${f.workers > 1 ? "s" : " "} (${f.shots} shot${f.shots > 1 ? "s" : ""}): ` +
        `${(f.cellUpdatesPerSecond / 1e6).toFixed(1)} M cell updates/s (${(f.computationalCellUpdatesPerSecond / 1e6).toFixed(1)} M with absorbing cells)`,
    );
  }
  for (const [m, s] of Object.entries(r.speedup)) lines.push(`  ${m === "psv" ? "P-SV" : "SH"} speed-up with all workers: ${s!.toFixed(2)}×`);
  return lines;
}
