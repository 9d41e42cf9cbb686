/**
 * The shot executor: how steps run independent per-shot work (the forward solve of one shot; the
 * misfit, adjoint source and gradient of one shot). Two implementations share this interface:
 * the local worker pool in this process (the default, {@link localShotExecutor}) and the Redis-backed
 * job queue that `tracewright worker` processes on any machine serve (./shot-queue.ts, chosen when
 * TRACEWRIGHT_REDIS_URL is set). Steps call one of them through {@link shotExecutorOf} and never
 * know which: results come back in the order the shots were given, never in arrival order, so
 * sums over shots are the same bit for bit wherever the shots ran.
 */
import type { ModelShotTaskArg } from "../kernels/fd/model-shots";
import type { SimulationResult } from "../kernels/fd/simulation";
import type { ShotGradientInput, ShotGradientOutput } from "../kernels/fwi/shot-gradient";
import type { WorkerPool } from "./pool";

/** The per-shot tasks of pipeline/workers/tasks.ts that may run on another machine, with their argument and result. */
export interface ShotTasks {
  modelShotTask: { arg: ModelShotTaskArg; result: SimulationResult };
  shotGradientTask: { arg: ShotGradientInput; result: ShotGradientOutput };
}

export type ShotTaskName = keyof ShotTasks;

/** Names of the per-shot tasks, for validation at the edges. */
export const SHOT_TASK_NAMES: readonly ShotTaskName[] = ["modelShotTask", "shotGradientTask"];

/**
 * Where a task's shared cancel flag (an Int32Array on a SharedArrayBuffer, checked by the solver every
 * 64 steps) sits in its argument. The flag never travels through the queue: a queue worker puts its
 * own there and raises it when the coordinator publishes a cancel.
 */
export const CANCEL_FLAG_PATH: Record<ShotTaskName, readonly string[]> = {
  modelShotTask: ["options", "cancelFlag"],
  shotGradientTask: ["cancelFlag"],
};

/** Where one task belongs: the batch (e.g. "stage-1/iteration-3/evaluation-2") and the shot (gather id). */
export interface ShotTaskPlace {
  /** Names the batch within the step; with the run, step and shot it makes the task id. */
  batch: string;
  /** Gather id of the shot; named in errors. */
  shotId: string;
  /** Local pool only: aborting it ends the worker thread (tasks with a cancel flag stop by the flag instead). */
  signal?: AbortSignal;
}

/** Runs per-shot tasks for one step of one run. */
export interface ShotExecutor {
  /** "local": this process's worker pool; "queue": the Redis job queue. */
  readonly kind: "local" | "queue";
  /** Runs one shot task. */
  runShot<K extends ShotTaskName>(task: K, arg: ShotTasks[K]["arg"], place: ShotTaskPlace): Promise<ShotTasks[K]["result"]>;
  /**
   * Runs one task per shot, all at once as far as workers allow; the results are in the order of
   * `shots`. Rejects on the first failure (the error names the shot).
   */
  runShots<K extends ShotTaskName>(
    task: K,
    shots: Array<{ shotId: string; arg: ShotTasks[K]["arg"] }>,
    options: { batch: string; signal?: AbortSignal; onShot?: (done: number, total: number, shotId: string) => void },
  ): Promise<Array<ShotTasks[K]["result"]>>;
}

/** Runs every shot through `runShot` and keeps the shot order. Shared by both executors. */
export async function runShotsInOrder<K extends ShotTaskName>(
  runShot: (task: K, arg: ShotTasks[K]["arg"], place: ShotTaskPlace) => Promise<ShotTasks[K]["result"]>,
  task: K,
  shots: Array<{ shotId: string; arg: ShotTasks[K]["arg"] }>,
  options: { batch: string; signal?: AbortSignal; onShot?: (done: number, total: number, shotId: string) => void },
): Promise<Array<ShotTasks[K]["result"]>> {
  let done = 0;
  return Promise.all(
    shots.map(async (s) => {
      const r = await runShot(task, s.arg, { batch: options.batch, shotId: s.shotId, signal: options.signal });
      done++;
      options.onShot?.(done, shots.length, s.shotId);
      return r;
    }),
  );
}

/** The executor on this process's worker pool: today's behaviour, the default. `pool` is asked for on first use. */
export function localShotExecutor(pool: () => WorkerPool): ShotExecutor {
  const runShot = <K extends ShotTaskName>(task: K, arg: ShotTasks[K]["arg"], place: ShotTaskPlace) =>
    pool().run(task, arg as never, place.signal ? { signal: place.signal } : undefined) as Promise<ShotTasks[K]["result"]>;
  return {
    kind: "local",
    runShot,
    runShots: (task, shots, options) => runShotsInOrder(runShot, task, shots, options),
  };
}

/** The executor a step uses: the one the runner gave it, else the local pool of its context (a StepContext). */
export function shotExecutorOf(ctx: { shots?: ShotExecutor; readonly pool: WorkerPool }): ShotExecutor {
  return ctx.shots ?? localShotExecutor(() => ctx.pool);
}

/**
 * The {@link ShotExecutor} as the "run modelShotTask" runner pipeline/kernels/fd/model-shots.ts takes
 * (kernels know no executors), with every shot of the call in one batch.
 */
export function modelShotRunner(executor: ShotExecutor, batch: string) {
  return {
    run(task: "modelShotTask", arg: ModelShotTaskArg, options?: { signal?: AbortSignal; shotId?: string }): Promise<SimulationResult> {
      return executor.runShot(task, arg, { batch, shotId: options?.shotId ?? "shot", signal: options?.signal });
    },
  };
}
