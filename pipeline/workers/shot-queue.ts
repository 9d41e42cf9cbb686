/**
 * The shot executor on a Redis-backed job queue (BullMQ): the coordinator's side. Each shot task
 * becomes one job whose data names its inputs by artifact hash (./task-exchange.ts); `tracewright
 * worker` processes on any machine that reaches Redis and the data folder take the jobs
 * (./queue-worker.ts) and answer with the hash of the result artifact.
 *
 * - Task id: run, step, batch (stage, iteration, line-search evaluation) and shot, plus a short
 *   digest of the inputs; BullMQ adds a job whose id exists only once, so a coordinator that
 *   submits a task again (a resumed run) gets the finished result instead of a second computation.
 * - Failures: a worker killed mid-task loses its lock; BullMQ's stalled-job check puts the job back
 *   for another worker. A task that throws is tried `attempts` times, then the step fails naming the
 *   shot. Results are collected per shot in shot order, so each shot counts exactly once.
 * - Cancel: the coordinator removes the step's waiting jobs and sets a cancel key the workers poll
 *   while a task runs; a running solve stops within 64 time steps (the solver's cancel flag).
 */
import os from "node:os";
import fs from "node:fs";
import { Queue, QueueEvents, type Job, type JobsOptions } from "bullmq";
import { artifactFilePath, readArtifactBytes } from "../artifact-store";
import { decodeArtifact } from "../artifact-codec";
import { sha256Hex } from "../hash";
import { AppError } from "../errors";
import { CANCEL_FLAG_PATH, runShotsInOrder, type ShotExecutor, type ShotTaskName, type ShotTaskPlace, type ShotTasks } from "./shot-executor";
import { createPartWriter, withoutPath, type PartWriter, type TaskParts } from "./task-exchange";

/** Name of the BullMQ queue of shot tasks. */
export const SHOT_QUEUE_NAME = "tracewright-shots";

/** Prefix of the Redis keys Tracewright keeps beside BullMQ's (cancel keys, the worker registry). */
export const KEY_PREFIX = "tracewright";

/** What a shot job carries (small: hashes and settings only). */
export interface ShotJobData {
  task: ShotTaskName;
  /** Run number, or null outside a run (tests, the bench). */
  runId: number | null;
  /** Step label within the run. */
  step: string;
  batch: string;
  shotId: string;
  parts: TaskParts;
  /** Redis key whose presence asks the worker to stop. */
  cancelKey: string;
  /** When the coordinator added the job, ms since 1970. */
  submittedAt: number;
}

/** What a worker answers for a finished shot job. */
export interface ShotJobResult {
  /** Artifact hash of the task's result. */
  resultHash: string;
  /** Host and process that ran it. */
  worker: string;
  /** Time spent fetching inputs (store or cache), in the task, and writing the result, ms. */
  fetchMs: number;
  computeMs: number;
  writeMs: number;
  /** Inputs read from the store (not the cache), and their bytes; bytes of the result written. */
  fetches: number;
  fetchedBytes: number;
  resultBytes: number;
}

/** Connection and behaviour of the queue, with defaults for production. */
export interface QueueSettings {
  /** Redis URL, e.g. redis://host:6379. */
  url: string;
  /** Tries of a task that throws before the run fails. @default 3 */
  attempts?: number;
  /** Pause before a retry, ms. @default 1000 */
  retryDelayMs?: number;
}

/** The queue settings from the environment: TRACEWRIGHT_REDIS_URL (absent: no queue, the local pool). */
export function queueSettingsFromEnv(env: Record<string, string | undefined> = process.env): QueueSettings | null {
  const url = env.TRACEWRIGHT_REDIS_URL?.trim();
  if (!url) return null;
  if (!/^rediss?:\/\//.test(url)) {
    throw new AppError("bad-input", `TRACEWRIGHT_REDIS_URL "${url}": expected a redis:// or rediss:// URL, e.g. redis://127.0.0.1:6379`, {
      field: "TRACEWRIGHT_REDIS_URL",
    });
  }
  const attempts = env.TRACEWRIGHT_QUEUE_ATTEMPTS ? Number(env.TRACEWRIGHT_QUEUE_ATTEMPTS) : undefined;
  if (attempts !== undefined && !(Number.isInteger(attempts) && attempts >= 1 && attempts <= 20)) {
    throw new AppError("bad-input", `TRACEWRIGHT_QUEUE_ATTEMPTS "${env.TRACEWRIGHT_QUEUE_ATTEMPTS}": expected a whole number from 1 to 20`, {
      field: "TRACEWRIGHT_QUEUE_ATTEMPTS",
    });
  }
  return { url, attempts };
}

/** BullMQ connection options for a URL; blocking workers need maxRetriesPerRequest null. */
export function connectionFor(url: string) {
  return { url, maxRetriesPerRequest: null };
}

/** The cancel key of one step of one run. */
export function cancelKeyOf(runId: number | null, step: string): string {
  return `${KEY_PREFIX}:cancel:${runId ?? "none"}:${step}`;
}

/** Job ids may not contain ":" (BullMQ); step labels and batches are free text. */
const idSafe = (s: string) => s.replace(/[:\s]+/g, "_");

/** The task id: run, step, batch, shot and a digest of the inputs. */
export function shotJobId(runId: number | null, step: string, batch: string, shotId: string, parts: TaskParts): string {
  const digest = sha256Hex(new TextEncoder().encode(JSON.stringify([parts.byHash, parts.inline]))).slice(0, 12);
  return [`run-${runId ?? "none"}`, idSafe(step), idSafe(batch), idSafe(shotId), digest].join("/");
}

/** The Redis commands Tracewright uses beside BullMQ's (a subset of BullMQ's client). */
export interface RedisLike {
  get(key: string): Promise<string | null>;
  set(key: string, value: string | number, options?: { PX?: number; EX?: number }): Promise<string | null>;
  del(...keys: string[]): Promise<number>;
  scan(cursor: string | number, options: { MATCH?: string; COUNT?: number }): Promise<[string, string[]]>;
}

/** The process's connection to the shot queue: one Queue and one QueueEvents listener. */
export interface ShotQueue {
  readonly settings: QueueSettings;
  readonly queue: Queue<ShotJobData, ShotJobResult>;
  readonly events: QueueEvents;
  /** Redis commands beside BullMQ's (cancel keys, worker registry). */
  redis(): Promise<RedisLike>;
  close(): Promise<void>;
}

/** Opens the queue and waits until Redis answers (rejects with a clear error when it does not within `answerWithinMs`, default 10 s). */
export async function openShotQueue(settings: QueueSettings, options: { answerWithinMs?: number } = {}): Promise<ShotQueue> {
  const limitMs = options.answerWithinMs ?? 10_000;
  const connection = connectionFor(settings.url);
  const queue = new Queue<ShotJobData, ShotJobResult>(SHOT_QUEUE_NAME, { connection });
  const events = new QueueEvents(SHOT_QUEUE_NAME, { connection });
  // An unreachable Redis would otherwise retry for ever in the background.
  queue.on("error", () => undefined);
  // Every job awaited adds a listener to the queue's "closing" event (BullMQ's waitUntilFinished): a batch has many.
  queue.setMaxListeners(0);
  events.setMaxListeners(0);
  events.on("error", () => undefined);
  const ready = Promise.all([queue.waitUntilReady(), events.waitUntilReady()]);
  const timeout = new Promise<never>((_, reject) =>
    setTimeout(
      () => reject(new AppError("bad-input", `Redis at ${settings.url} did not answer within ${limitMs / 1000} s (TRACEWRIGHT_REDIS_URL)`, { field: "TRACEWRIGHT_REDIS_URL" })),
      limitMs,
    ).unref(),
  );
  try {
    await Promise.race([ready, timeout]);
  } catch (err) {
    await Promise.allSettled([queue.close(), events.close()]);
    throw err;
  }
  return {
    settings,
    queue,
    events,
    redis: () => queue.backend.client as unknown as Promise<RedisLike>,
    async close() {
      await Promise.allSettled([events.close(), queue.close()]);
    },
  };
}

let shared: { url: string; queue: Promise<ShotQueue> } | undefined;

/** The process-wide queue connection for TRACEWRIGHT_REDIS_URL, opened on first use. */
export function sharedShotQueue(settings: QueueSettings): Promise<ShotQueue> {
  if (!shared || shared.url !== settings.url) {
    const opening = openShotQueue(settings);
    shared = { url: settings.url, queue: opening };
    opening.catch(() => {
      if (shared?.queue === opening) shared = undefined;
    });
  }
  return shared.queue;
}

/** Closes the process-wide queue connection if one was opened. */
export async function closeSharedShotQueue(): Promise<void> {
  const s = shared;
  shared = undefined;
  if (s) await s.queue.then((q) => q.close()).catch(() => undefined);
}

/** Figures of one executor, for the bench and the step log. */
export interface QueueExecutorStats {
  tasks: number;
  /** Bytes written into the artifact store for task inputs, and read back as results. */
  inputBytesWritten: number;
  resultBytesRead: number;
  /** Sum over tasks of: the coordinator's preparation, the time from submission to the result read, the worker's compute. */
  prepareMs: number;
  roundTripMs: number;
  workerComputeMs: number;
  workerFetchMs: number;
  workerWriteMs: number;
  /** Coordinator time reading and decoding results, ms. */
  readMs: number;
  /** Tasks whose result was already there (submitted before, e.g. by a coordinator that died). */
  reused: number;
}

export interface QueueExecutor extends ShotExecutor {
  readonly stats: QueueExecutorStats;
}

/**
 * The executor on the job queue for one step of one run. `signal` is the step's: when it aborts,
 * the step's waiting jobs are removed and the workers are told to stop its running ones.
 */
export function queueShotExecutor(
  queue: ShotQueue,
  scope: { runId: number | null; step: string; signal?: AbortSignal },
): QueueExecutor {
  const cancelKey = cancelKeyOf(scope.runId, scope.step);
  const stats: QueueExecutorStats = {
    tasks: 0, inputBytesWritten: 0, resultBytesRead: 0, prepareMs: 0, roundTripMs: 0, workerComputeMs: 0, workerFetchMs: 0, workerWriteMs: 0, readMs: 0, reused: 0,
  };
  const mine = new Set<string>();
  let cancelPublished: Promise<void> | null = null;
  // A step that starts (or resumes) again must not see an old cancel.
  const cleared = queue.redis().then((r) => r.del(cancelKey)).then(() => undefined);

  const publishCancel = () => {
    cancelPublished ??= (async () => {
      const r = await queue.redis();
      await r.set(cancelKey, String(Date.now()), { EX: 3600 });
      // Waiting jobs go at once; running ones stop when their worker sees the key.
      await Promise.allSettled([...mine].map((id) => queue.queue.remove(id)));
    })();
    return cancelPublished;
  };
  scope.signal?.addEventListener("abort", () => void publishCancel().catch(() => undefined), { once: true });

  const abortError = () => {
    const e = new Error("cancelled");
    e.name = "AbortError";
    return e;
  };

  const jobOptions = (jobId: string): JobsOptions => ({
    jobId,
    attempts: queue.settings.attempts ?? 3,
    backoff: { type: "fixed", delay: queue.settings.retryDelayMs ?? 1000 },
    // Finished jobs stay a day for the task tables (and for a resumed coordinator to find them).
    removeOnComplete: { age: 24 * 3600, count: 50_000 },
    removeOnFail: { age: 7 * 24 * 3600 },
  });

  /** Reads the result artifact of a finished job; null when it is gone (read and deleted before). */
  const readResult = (r: ShotJobResult): unknown | null => {
    let bytes: Uint8Array;
    try {
      bytes = readArtifactBytes(r.resultHash);
    } catch {
      return null;
    }
    stats.resultBytesRead += bytes.length;
    const value = decodeArtifact(bytes, `result ${r.resultHash.slice(0, 12)}`) as { jobId: string; result: unknown };
    // The result carries its job id, so its artifact belongs to this task alone: delete it once read.
    fs.rmSync(artifactFilePath(r.resultHash), { force: true });
    return value.result;
  };

  async function submitAndWait(task: ShotTaskName, arg: unknown, place: ShotTaskPlace, writer: PartWriter): Promise<unknown> {
    await cleared;
    if (scope.signal?.aborted) throw abortError();
    const t0 = performance.now();
    const before = writer.bytesWritten;
    const parts = writer.split(withoutPath(arg as Record<string, unknown>, CANCEL_FLAG_PATH[task]));
    stats.inputBytesWritten += writer.bytesWritten - before;
    const jobId = shotJobId(scope.runId, scope.step, place.batch, place.shotId, parts);
    const data: ShotJobData = { task, runId: scope.runId, step: scope.step, batch: place.batch, shotId: place.shotId, parts, cancelKey, submittedAt: Date.now() };
    stats.prepareMs += performance.now() - t0;
    mine.add(jobId);
    stats.tasks++;
    for (let round = 0; round < 2; round++) {
      let job: Job<ShotJobData, ShotJobResult> = await queue.queue.add(task, data, jobOptions(jobId));
      const state = await job.getState();
      if (state === "failed") {
        // Failed before (an earlier attempt of this run): try again.
        await job.retry("failed");
        job = (await queue.queue.getJob(jobId)) ?? job;
      } else if (state === "completed") stats.reused++;
      let onAbort = () => undefined as void;
      const abort = new Promise<never>((_, reject) => {
        onAbort = () => reject(abortError());
        if (scope.signal?.aborted) onAbort();
        scope.signal?.addEventListener("abort", onAbort, { once: true });
      });
      abort.catch(() => undefined);
      let answer: ShotJobResult;
      try {
        answer = (await Promise.race([job.waitUntilFinished(queue.events), abort])) as ShotJobResult;
      } catch (err) {
        if (scope.signal?.aborted) throw abortError();
        const attempts = queue.settings.attempts ?? 3;
        throw new AppError(
          "step-failed",
          `shot ${place.shotId} (${place.batch}) failed on the job queue after ${attempts} ${attempts === 1 ? "try" : "tries"}: ${(err as Error).message}`,
          { field: place.shotId },
          { cause: err },
        );
      } finally {
        scope.signal?.removeEventListener("abort", onAbort);
      }
      const r0 = performance.now();
      const result = readResult(answer);
      stats.readMs += performance.now() - r0;
      if (result === null) {
        // A finished job whose result was read before (by a coordinator that then died): run it again.
        await job.remove().catch(() => undefined);
        continue;
      }
      stats.roundTripMs += performance.now() - t0;
      stats.workerComputeMs += answer.computeMs;
      stats.workerFetchMs += answer.fetchMs;
      stats.workerWriteMs += answer.writeMs;
      return result;
    }
    throw new AppError("step-failed", `shot ${place.shotId} (${place.batch}): the result of task ${jobId} vanished twice from the artifact store`);
  }

  const runShotWith = (writer: PartWriter) => <K extends ShotTaskName>(task: K, arg: ShotTasks[K]["arg"], place: ShotTaskPlace) =>
    submitAndWait(task, arg, place, writer) as Promise<ShotTasks[K]["result"]>;

  // Single shots of one batch share a writer (the model is written once per batch).
  const writers = new Map<string, PartWriter>();
  return {
    kind: "queue",
    stats,
    runShot(task, arg, place) {
      let w = writers.get(place.batch);
      if (!w) {
        w = createPartWriter();
        writers.clear();
        writers.set(place.batch, w);
      }
      return runShotWith(w)(task, arg, place);
    },
    runShots(task, shots, options) {
      return runShotsInOrder(runShotWith(createPartWriter()), task, shots, options);
    },
  };
}

/** Host name and process id, as workers register themselves. */
export function processLabel(): string {
  return `${os.hostname()}:${process.pid}`;
}

/** One shot task of a run as the task tables show it. */
export interface ShotTaskRow {
  jobId: string;
  step: string;
  batch: string;
  shotId: string;
  state: string;
  /** Tries that threw, and times its worker died under it (the stalled-job check put it back). */
  attemptsMade: number;
  stalls: number;
  worker: string | null;
  failedReason: string | null;
  submittedAt: number;
  finishedAt: number | null;
  computeMs: number | null;
}

/**
 * The shot tasks of a run still on the queue (finished ones are kept a day), in step, batch and shot
 * order. Reads every job of the queue's lists: meant for listings, not for hot paths.
 */
export async function listRunShotTasks(queue: ShotQueue, runId: number, limit = 2000): Promise<ShotTaskRow[]> {
  const prefix = `run-${runId}/`;
  const rows: ShotTaskRow[] = [];
  for (const state of ["active", "waiting", "delayed", "prioritized", "completed", "failed"] as const) {
    const jobs = await queue.queue.getJobs([state], 0, -1);
    for (const j of jobs) {
      if (!j?.id?.startsWith(prefix)) continue;
      const r = j.returnvalue as ShotJobResult | null;
      rows.push({
        jobId: j.id,
        step: j.data.step,
        batch: j.data.batch,
        shotId: j.data.shotId,
        state,
        attemptsMade: j.attemptsMade,
        stalls: (j as unknown as { stalledCounter?: number }).stalledCounter ?? 0,
        worker: r?.worker ?? null,
        failedReason: j.failedReason ?? null,
        submittedAt: j.data.submittedAt,
        finishedAt: j.finishedOn ?? null,
        computeMs: r ? Math.round(r.computeMs) : null,
      });
      if (rows.length >= limit) break;
    }
  }
  return rows.sort((a, b) => a.step.localeCompare(b.step) || a.submittedAt - b.submittedAt || a.batch.localeCompare(b.batch) || a.shotId.localeCompare(b.shotId));
}
