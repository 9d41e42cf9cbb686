/**
 * Solver bench: cell updates per second of the WebAssembly elastic kernel (P-SV and SH) with one
 * worker (one shot) and with two workers (one shot each, at the same time), measured in pairs
 * against the C yardstick (pipeline/bench/yardstick.ts) on the same grid: the yardstick alone, the
 * solver with one worker, two yardsticks at once, the solver with two workers, repeated. These
 * machines are shared and their speed drifts, so each figure is the median over the pairs of the
 * ratio within the pair, with its minimum and maximum. Cells are counted the conservative way:
 * model cells only, not the absorbing strips. Two ways of stepping are measured: one kernel call
 * per step with the source added from JavaScript between calls ("per-step", the shot driver's way
 * today) and the kernel's stepper, several steps per call in one pass over the rows with the
 * source and receivers inside the kernel ("stepper"). Prints nothing; `tracewright bench` prints
 * the figures (see formatSolverBench).
 */
import { createWorkerPool } from "../workers/pool";
import type { WaveMode } from "../kernels/fd/layout";
import { locateYardstick, runYardstick, type YardstickLocation } from "./yardstick";

/** How the kernel is driven: one call per step, or the stepper with {@link STEPPER_STEPS_PER_CALL} steps per call. */
export type Stepping = "per-step" | "stepper";
export const STEPPINGS: readonly Stepping[] = ["per-step", "stepper"];
/** Steps per stepper call in the bench (the shot driver checks for cancellation every 64 steps). */
export const STEPPER_STEPS_PER_CALL = 64;

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
  /** Workers of the parallel figure. Default 2. */
  workers?: number;
  /** Modes to measure. Default both. */
  modes?: WaveMode[];
  /** Pairs (rounds of yardstick and solver). Default 5. */
  pairs?: number;
  /** Yardstick binary; default TRACEWRIGHT_YARDSTICK or a build of ../shared/perf-ref. */
  yardstick?: string;
}

/** Median, minimum and maximum of per-pair values. */
export interface Spread {
  median: number;
  min: number;
  max: number;
}

/** One measured figure (medians over the pairs). */
export interface SolverBenchFigure {
  mode: WaveMode;
  stepping: Stepping;
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

/** The solver against the C yardstick, per mode. */
export interface YardstickComparison {
  mode: WaveMode;
  stepping: Stepping;
  /** Solver with one worker over the yardstick alone (P-SV yardstick for both modes). */
  oneWorkerRatio: Spread;
  /** Solver with `workers` workers over as many yardstick processes at once. */
  parallelRatio: Spread;
  /** Solver with `workers` workers over the solver with one, within each pair (target ×1.8 for two). */
  parallelSpeedup: Spread;
  /** The yardstick's own speed-up with as many processes: what the machine allows just then. */
  yardstickParallelSpeedup: Spread;
  /** Million cell updates per second: solver one worker, yardstick alone. */
  solverMcells: Spread;
  yardstickMcells: Spread;
}

/** Result of {@link benchSolver}. */
export interface SolverBenchResult {
  nx: number;
  nz: number;
  steps: number;
  pmlCells: number;
  freeSurface: boolean;
  pairs: number;
  workers: number;
  figures: SolverBenchFigure[];
  /** Parallel figure over the one-worker figure (median of the per-pair ratios), per mode, per-step calls. */
  speedup: Partial<Record<WaveMode, number>>;
  /** The same with the stepper. */
  stepperSpeedup: Partial<Record<WaveMode, number>>;
  /** The C yardstick comparison, or why it was not measured. */
  yardstick:
    | { measured: true; binary: string; origin: "option" | "environment" | "built"; comparisons: YardstickComparison[] }
    | { measured: false; reason: string };
}

/** Median (upper middle for an even count), minimum and maximum. */
export function spread(values: number[]): Spread {
  if (values.length === 0) throw new RangeError("spread needs at least one value");
  const s = [...values].sort((a, b) => a - b);
  return { median: s[s.length >> 1], min: s[0], max: s[s.length - 1] };
}

/** Measures the solver, in pairs with the C yardstick when there is one. */
export async function benchSolver(opts: SolverBenchOptions = {}): Promise<SolverBenchResult> {
  const o = {
    nx: opts.nx ?? 1000,
    nz: opts.nz ?? 400,
    steps: opts.steps ?? 300,
    pmlCells: opts.pmlCells ?? 20,
    pairs: opts.pairs ?? 5,
    workers: opts.workers ?? 2,
  };
  for (const [k, v] of Object.entries(o)) {
    if (!Number.isInteger(v) || v < (k === "pmlCells" ? 0 : 1)) throw new RangeError(`${k} must be a positive integer, got ${v}`);
  }
  const freeSurface = opts.freeSurface ?? true;
  const modes = opts.modes ?? ["psv", "sh"];
  const where: YardstickLocation = locateYardstick(opts.yardstick);
  const cells = o.nx * o.nz;
  const task = (mode: WaveMode) => ({ mode, nx: o.nx, nz: o.nz, steps: o.steps, pmlCells: o.pmlCells, freeSurface });

  const pool = createWorkerPool(o.workers);
  const figures: SolverBenchFigure[] = [];
  const comparisons: YardstickComparison[] = [];
  const speedup: Partial<Record<WaveMode, number>> = {};
  const stepperSpeedup: Partial<Record<WaveMode, number>> = {};
  try {
    // Start every thread and let the engine optimise the kernel before timing.
    await Promise.all(Array.from({ length: o.workers }, () => pool.run("kernelBenchTask", { ...task("psv"), nx: 64, nz: 64, steps: 50 })));
    await Promise.all(Array.from({ length: o.workers }, () => pool.run("kernelBenchTask", { ...task("sh"), nx: 64, nz: 64, steps: 50 })));
    for (const mode of modes) {
      const one = { "per-step": [] as number[], stepper: [] as number[] };
      const many = { "per-step": [] as number[], stepper: [] as number[] };
      const oneSec = { "per-step": [] as number[], stepper: [] as number[] };
      const manySec = { "per-step": [] as number[], stepper: [] as number[] };
      const c1: number[] = [];
      const cMany: number[] = [];
      let compCells = 0;
      const arg = (st: Stepping) => ({ ...task(mode), stepsPerCall: st === "stepper" ? STEPPER_STEPS_PER_CALL : 1 });
      for (let p = 0; p < o.pairs; p++) {
        if (where.found) c1.push((await runYardstick(where.binary, o.nx, o.nz, o.steps)).mcells * 1e6);
        for (const st of STEPPINGS) {
          const a = await pool.run("kernelBenchTask", arg(st));
          compCells = a.computationalCells;
          one[st].push((cells * o.steps) / a.seconds);
          oneSec[st].push(a.seconds);
        }
        if (where.found) {
          const runs = await Promise.all(Array.from({ length: o.workers }, () => runYardstick(where.binary, o.nx, o.nz, o.steps)));
          cMany.push((o.workers * cells * o.steps) / Math.max(...runs.map((r) => r.seconds)));
        }
        for (const st of STEPPINGS) {
          const b = await Promise.all(Array.from({ length: o.workers }, () => pool.run("kernelBenchTask", arg(st))));
          const sec = Math.max(...b.map((r) => r.seconds));
          many[st].push((o.workers * cells * o.steps) / sec);
          manySec[st].push(sec);
        }
      }
      for (const st of STEPPINGS) {
        const oneRate = spread(one[st]).median;
        const manyRate = spread(many[st]).median;
        figures.push(
          {
            mode, stepping: st, workers: 1, shots: 1, cellUpdatesPerSecond: oneRate,
            computationalCellUpdatesPerSecond: (oneRate * compCells) / cells, seconds: spread(oneSec[st]).median,
          },
          {
            mode, stepping: st, workers: o.workers, shots: o.workers, cellUpdatesPerSecond: manyRate,
            computationalCellUpdatesPerSecond: (manyRate * compCells) / cells, seconds: spread(manySec[st]).median,
          },
        );
        (st === "stepper" ? stepperSpeedup : speedup)[mode] = spread(many[st].map((m, i) => m / one[st][i])).median;
        if (where.found) {
          comparisons.push({
            mode,
            stepping: st,
            oneWorkerRatio: spread(one[st].map((m, i) => m / c1[i])),
            parallelRatio: spread(many[st].map((m, i) => m / cMany[i])),
            parallelSpeedup: spread(many[st].map((m, i) => m / one[st][i])),
            yardstickParallelSpeedup: spread(cMany.map((m, i) => m / c1[i])),
            solverMcells: spread(one[st].map((m) => m / 1e6)),
            yardstickMcells: spread(c1.map((m) => m / 1e6)),
          });
        }
      }
    }
  } finally {
    await pool.close();
  }
  return {
    ...o,
    freeSurface,
    figures,
    speedup,
    stepperSpeedup,
    yardstick: where.found
      ? { measured: true, binary: where.binary, origin: where.origin, comparisons }
      : { measured: false, reason: where.reason },
  };
}

const modeName = (m: WaveMode) => (m === "psv" ? "P-SV" : "SH");
const fmtSpread = (s: Spread, digits = 2) => `${s.median.toFixed(digits)} (${s.min.toFixed(digits)}–${s.max.toFixed(digits)})`;

/** Lines for a terminal: one per figure, cell updates in millions per second, then the yardstick ratios. */
export function formatSolverBench(r: SolverBenchResult): string[] {
  const lines = [
    `solver: ${r.nx} × ${r.nz} cells, ${r.steps} steps, PML ${r.pmlCells} cells, ${r.freeSurface ? "free surface" : "absorbing top"}; ` +
      `medians of ${r.pairs} pair${r.pairs > 1 ? "s" : ""}; per-step: one kernel call per step; stepper: ${STEPPER_STEPS_PER_CALL} steps per call`,
  ];
  for (const f of r.figures) {
    lines.push(
      `  ${modeName(f.mode).padEnd(4)}  ${f.stepping.padEnd(8)}  ${f.workers} worker${f.workers > 1 ? "s" : " "} (${f.shots} shot${f.shots > 1 ? "s" : ""}): ` +
        `${(f.cellUpdatesPerSecond / 1e6).toFixed(1)} M cell updates/s (${(f.computationalCellUpdatesPerSecond / 1e6).toFixed(1)} M with absorbing cells)`,
    );
  }
  for (const [m, s] of Object.entries(r.speedup)) {
    lines.push(
      `  ${modeName(m as WaveMode)} speed-up with ${r.workers} workers: per-step ${s!.toFixed(2)}×, stepper ${r.stepperSpeedup[m as WaveMode]!.toFixed(2)}×`,
    );
  }
  const y = r.yardstick;
  if (!y.measured) {
    lines.push(`  ratio to the C yardstick: not measured (${y.reason}); give --yardstick <path> or set TRACEWRIGHT_YARDSTICK`);
    return lines;
  }
  lines.push(`  against the C yardstick (${y.origin === "built" ? "built from ../shared/perf-ref" : `from ${y.origin === "option" ? "--yardstick" : "TRACEWRIGHT_YARDSTICK"}`}: ${y.binary}),`);
  lines.push(`  paired ratios, median (min–max); model cells only; the yardstick is P-SV for both modes:`);
  for (const c of y.comparisons) {
    lines.push(
      `  ${modeName(c.mode).padEnd(4)}  ${c.stepping.padEnd(8)}  1 worker / C: ${fmtSpread(c.oneWorkerRatio)}   ${r.workers} workers / ${r.workers} C: ${fmtSpread(c.parallelRatio)}   ` +
        `${r.workers} workers / 1 worker: ${fmtSpread(c.parallelSpeedup)}× (C itself: ${fmtSpread(c.yardstickParallelSpeedup)}×)`,
    );
    lines.push(`                  solver ${fmtSpread(c.solverMcells, 0)} M/s, C ${fmtSpread(c.yardstickMcells, 0)} M/s`);
  }
  return lines;
}
