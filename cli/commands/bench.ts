/** `tracewright bench`: speed figures of the readers, the signal steps and the solver. */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import type { Command } from "commander";
import { execa } from "execa";
import { projectRoot } from "../../db/paths";
import { AppError } from "../../pipeline/errors";
import { action, printJson } from "../shared";

const PARTS = ["readers", "signal", "field-check", "solver", "inversion", "queue"] as const;
type Part = (typeof PARTS)[number];
/**
 * Figures measured only when asked for by name: they start the control room (`next start`, built
 * when needed) and write to a data folder (--data, a copy of a prepared one).
 */
const ON_REQUEST = { concurrency: "concurrency-figure.ts", load: "load-figure.ts" } as const;
type OnRequest = keyof typeof ON_REQUEST;

/** Runs scripts/<figure script> on `data`; its table goes to the terminal (stderr with --json), its figures are returned. */
async function runFigureScript(part: OnRequest, data: string | undefined, seconds: string | undefined, json: boolean): Promise<{ exitCode: number; figures: unknown }> {
  if (!data) throw new AppError("bad-input", `--only ${part}: give --data <folder>, a copy of a prepared data folder (the figure writes to it)`, { field: "--data" });
  if (seconds !== undefined && !(Number(seconds) > 0)) throw new AppError("bad-input", `--seconds ${seconds}: expected a positive number`, { field: "--seconds" });
  const out = path.join(fs.mkdtempSync(path.join(os.tmpdir(), `tw-${part}-`)), `${part}.json`);
  const r = await execa(process.execPath, ["--import", "tsx", path.join(projectRoot, "scripts", ON_REQUEST[part]), "--data", data, "--out", out, ...(seconds ? ["--seconds", seconds] : [])], {
    cwd: projectRoot,
    stdin: "ignore",
    stdout: json ? process.stderr : "inherit",
    stderr: "inherit",
    reject: false,
  });
  const figures = fs.existsSync(out) ? JSON.parse(fs.readFileSync(out, "utf8")) : null;
  return { exitCode: r.exitCode ?? 1, figures };
}

function parseGrid(text: string): { nx: number; nz: number } {
  const m = /^(\d+)x(\d+)$/.exec(text);
  const nx = Number(m?.[1]);
  const nz = Number(m?.[2]);
  if (!m || nx < 16 || nz < 16 || nx * nz > 50_000_000) {
    throw new AppError("bad-input", `--grid ${text}: expected <nx>x<nz> cells, each at least 16 and at most 50 million in all, e.g. 1000x400`, {
      field: "--grid",
    });
  }
  return { nx, nz };
}

export function registerBench(program: Command): void {
  program
    .command("bench")
    .description(
      "measure and print speed figures: field-file readers, signal steps, field check, finite-difference solver, waveform inversion, shot tasks on the job queue; on request, concurrent writers and the control room under load",
    )
    .option("--only <part>", `measure one part: ${PARTS.join(", ")}; or, only when named, ${Object.keys(ON_REQUEST).join(", ")}`)
    .option("--data <folder>", "concurrency, load: the data folder to measure on, a copy of a prepared one (the figures write to it)")
    .option("--seconds <s>", "concurrency: how long the writers run (default 60); load: seconds per target (default 30)")
    .option("--grid <nx>x<nz>", "solver grid in cells", "1000x400")
    .option("--steps <n>", "solver time steps per shot", "300")
    .option("--pairs <n>", "solver: rounds of the C yardstick and the solver in turn; figures are medians over them", "5")
    .option(
      "--yardstick <path>",
      "solver: the C yardstick binary (default: TRACEWRIGHT_YARDSTICK, else built from ../shared/perf-ref when gcc is present)",
    )
    .option("--json", "print JSON")
    .action(
      action(async (opts: { only?: string; grid: string; steps: string; pairs: string; yardstick?: string; data?: string; seconds?: string; json?: boolean }) => {
        const choices = [...PARTS, ...Object.keys(ON_REQUEST)];
        if (opts.only && !choices.includes(opts.only)) {
          throw new AppError("bad-input", `--only ${opts.only}: expected one of ${choices.join(", ")}`, { field: "--only", choices });
        }
        if (opts.only && opts.only in ON_REQUEST) {
          const part = opts.only as OnRequest;
          const r = await runFigureScript(part, opts.data, opts.seconds, Boolean(opts.json));
          if (opts.json) printJson({ [part]: r.figures });
          // Exit 1 when the figure found errors (busy errors, lost lines, failed requests).
          if (r.exitCode !== 0) process.exitCode = 1;
          return;
        }
        const want = (p: Part) => !opts.only || opts.only === p;
        const steps = Number(opts.steps);
        if (!Number.isInteger(steps) || steps < 10) throw new AppError("bad-input", `--steps ${opts.steps}: expected a whole number of at least 10`, { field: "--steps" });
        const grid = parseGrid(opts.grid);
        const pairs = Number(opts.pairs);
        if (!Number.isInteger(pairs) || pairs < 1 || pairs > 100) {
          throw new AppError("bad-input", `--pairs ${opts.pairs}: expected a whole number from 1 to 100`, { field: "--pairs" });
        }
        const out = (s: string) => {
          if (!opts.json) process.stdout.write(`${s}\n`);
        };
        const results: Record<string, unknown> = {};
        if (want("readers")) {
          const { benchReaders } = await import("../../pipeline/bench/io");
          const r = await benchReaders();
          results.readers = r;
          out("readers (MB/s of file read and decoded):");
          out(`  SEG-2 float32 little-endian  ${r.seg2MBps.toFixed(0)}`);
          out(`  SEG-2 int16 big-endian       ${r.seg2Int16BigEndianMBps.toFixed(0)}`);
          out(`  SEG-Y IEEE float             ${r.segyMBps.toFixed(0)}`);
          out(`  SEG-Y IBM float              ${r.segyIbmMBps.toFixed(0)}`);
        }
        if (want("signal")) {
          const { benchSignalSteps } = await import("../../pipeline/bench/signal");
          const rows = await benchSignalSteps();
          results.signal = rows;
          out("signal steps (96 traces × 4,000 samples, one core, ms):");
          for (const r of rows) out(`  ${r.step.padEnd(66)} ${r.ms.toFixed(1)}`);
        }
        if (want("field-check")) {
          const { benchFieldCheck } = await import("../../pipeline/bench/field-check");
          const r = await benchFieldCheck();
          results.fieldCheck = r;
          out(`field check (${r.records} records of ${r.channels} channels × ${r.samples} samples, one core, ms per record):`);
          out(`  wall ${r.msPerRecord.median.toFixed(1)} (${r.msPerRecord.min.toFixed(1)}–${r.msPerRecord.max.toFixed(1)} over ${r.repeats} runs), CPU ${r.cpuMsPerRecord.toFixed(1)}`);
        }
        if (want("solver")) {
          const { benchSolver, formatSolverBench } = await import("../../pipeline/bench/solver");
          // Peak resident memory of the process (workers are threads of it) while the solver runs:
          // the fields of one shot per worker, nothing per time step.
          const baseline = process.memoryUsage().rss;
          let peak = baseline;
          const sampler = setInterval(() => (peak = Math.max(peak, process.memoryUsage().rss)), 50);
          const r = await benchSolver({ ...grid, steps, pairs, yardstick: opts.yardstick });
          clearInterval(sampler);
          const memory = { baselineMB: baseline / 1e6, peakMB: peak / 1e6, fieldsPerShotMB: (grid.nx * grid.nz * 4 * 9) / 1e6 };
          results.solver = { ...r, memory };
          for (const line of formatSolverBench(r)) out(line);
          out(
            `  memory: ${memory.peakMB.toFixed(0)} MB peak resident (${memory.baselineMB.toFixed(0)} MB before; the nine P-SV field arrays of one ${grid.nx}×${grid.nz} shot are ${memory.fieldsPerShotMB.toFixed(0)} MB)`,
          );
        }
        if (want("inversion")) {
          const { benchInversion, formatInversionBench } = await import("../../pipeline/bench/inversion");
          const { createWorkerPool } = await import("../../pipeline/workers/pool");
          const pool = createWorkerPool();
          try {
            const r = await benchInversion(pool);
            results.inversion = r;
            for (const line of formatInversionBench(r)) out(line);
          } finally {
            await pool.close();
          }
        }
        if (want("queue")) {
          const { benchQueue, formatQueueBench } = await import("../../pipeline/bench/queue");
          const r = await benchQueue((s) => process.stderr.write(`${s}\n`));
          results.queue = r;
          for (const line of formatQueueBench(r)) out(line);
        }
        if (opts.json) printJson(results);
      }),
    );
}
