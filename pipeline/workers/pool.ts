/**
 * The worker pool: one piscina pool per process, sized to the CPU cores, running the
 * task functions exported by ./tasks.ts. Heavy kernels (solver time loops, filters on
 * large gathers) run here with their buffers transferred, not copied.
 *
 * Works under tsx (workers inherit tsx's loader), under vitest and plain node (we add
 * `--import tsx` so the .ts worker entry loads).
 */
import os from "node:os";
import path from "node:path";
import { fileURLToPath } from "node:url";
import { Piscina } from "piscina";
import type * as Tasks from "./tasks";

type TaskMap = typeof Tasks;
export type TaskName = { [K in keyof TaskMap]: TaskMap[K] extends (...a: never[]) => unknown ? K : never }[keyof TaskMap];
type TaskArg<K extends TaskName> = Parameters<TaskMap[K]>[0];
type TaskReturn<K extends TaskName> = Awaited<ReturnType<TaskMap[K]>>;

export interface WorkerPool {
  /** Number of worker threads. */
  readonly size: number;
  /**
   * Runs a named task from tasks.ts in a worker. Pass the ArrayBuffers to move (not copy)
   * in `transfer`; they are detached in the caller afterwards.
   */
  run<K extends TaskName>(
    task: K,
    arg: TaskArg<K>,
    options?: { transfer?: ArrayBuffer[]; signal?: AbortSignal },
  ): Promise<TaskReturn<K>>;
  /** Stops the workers. */
  close(): Promise<void>;
}

const here = path.dirname(fileURLToPath(import.meta.url));

function workerExecArgv(): string[] | undefined {
  const inherited = process.execArgv;
  const hasTsx = inherited.some((a) => a.includes("tsx")) || Boolean(process.env.TSX_LOADED);
  // Under tsx the workers inherit its loader; elsewhere (vitest, plain node) add it.
  return hasTsx ? undefined : [...inherited, "--import", "tsx"];
}

/** Default worker count: all cores, or TRACEWRIGHT_WORKERS when set. */
export function defaultWorkerCount(): number {
  const env = Number(process.env.TRACEWRIGHT_WORKERS);
  if (Number.isInteger(env) && env > 0) return env;
  return Math.max(1, os.availableParallelism?.() ?? os.cpus().length);
}

/** Creates a pool with `threads` workers (default: all cores). */
export function createWorkerPool(threads = defaultWorkerCount()): WorkerPool {
  const jsEntry = path.join(here, "entry.js");
  const tsEntry = path.join(here, "entry.ts");
  // entry-loader.cjs registers tsx inside each worker and loads entry.ts (see its header).
  const loaderEntry = path.join(here, "entry-loader.cjs");
  void tsEntry;
  const piscina = new Piscina({
    filename: loaderEntry,
    minThreads: threads,
    maxThreads: threads,
    idleTimeout: 30_000,
    execArgv: workerExecArgv(),
  });
  void jsEntry;
  return {
    size: threads,
    run(task, arg, options) {
      return piscina.run(arg, {
        name: task as string,
        transferList: options?.transfer as never,
        signal: options?.signal,
      });
    },
    async close() {
      await piscina.destroy();
    },
  };
}

let shared: WorkerPool | undefined;

/** The process-wide pool, created on first use. */
export function sharedWorkerPool(): WorkerPool {
  shared ??= createWorkerPool();
  return shared;
}

/** Closes the process-wide pool if one was created. */
export async function closeSharedWorkerPool(): Promise<void> {
  if (shared) {
    const p = shared;
    shared = undefined;
    await p.close();
  }
}
