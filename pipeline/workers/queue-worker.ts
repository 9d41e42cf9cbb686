/**
 * A queue worker (`tracewright worker`): takes shot jobs from the Redis queue (BullMQ), fetches the
 * inputs it lacks from the artifact store into a memory cache by hash, runs the task in its own
 * worker pool (so the event loop stays free to renew the job's lock and to watch for a cancel) and
 * writes the result as an artifact whose hash the job returns.
 *
 * Registers itself in Redis (host, pid, tasks done, current tasks, last heard), refreshed every few
 * seconds, so `tracewright workers` and the control room can list the workers.
 */
import os from "node:os";
import { UnrecoverableError, Worker, type Job } from "bullmq";
import { writeArtifact } from "../artifact-store";
import { createWorkerPool, type WorkerPool } from "./pool";
import { CANCEL_FLAG_PATH, SHOT_TASK_NAMES, type ShotTaskName } from "./shot-executor";
import { connectionFor, KEY_PREFIX, openShotQueue, SHOT_QUEUE_NAME, type QueueSettings, type RedisLike, type ShotJobData, type ShotJobResult } from "./shot-queue";
import { ArtifactCache, joinParts, withPath } from "./task-exchange";

/** A worker's entry in the registry (Redis key tracewright:worker:<id>, JSON). */
export interface WorkerRecord {
  id: string;
  host: string;
  pid: number;
  concurrency: number;
  tasksDone: number;
  tasksFailed: number;
  /** Job ids running now. */
  currentTasks: string[];
  startedAt: number;
  /** Last heartbeat, ms since 1970. */
  lastHeardAt: number;
  /** Inputs fetched from the store (not the cache) and their bytes. */
  fetches: number;
  fetchedBytes: number;
}

/** Seconds a registry entry outlives its last heartbeat (a killed worker stays listed that long, as silent). */
export const WORKER_RECORD_TTL_S = 600;

export const workerKey = (id: string) => `${KEY_PREFIX}:worker:${id}`;

export interface ShotWorkerOptions {
  settings: QueueSettings;
  /** Jobs taken at once (and pool threads). @default 1 */
  concurrency?: number;
  /** A job's lock lasts this long without renewal (BullMQ renews it at half); a killed worker's job goes back after it. @default 30000 */
  lockDurationMs?: number;
  /** How often the stalled-job check runs, ms. @default lockDurationMs */
  stalledIntervalMs?: number;
  /** Decoded inputs kept in memory, bytes. @default 512 MB */
  cacheBytes?: number;
  /** How often a running task looks for a cancel, ms. @default 250 */
  cancelPollMs?: number;
  /** Registry refresh, ms. @default 2000 */
  heartbeatMs?: number;
  /** Called on task start and end, for the terminal. */
  onEvent?: (e: { kind: "start" | "done" | "failed" | "cancelled"; jobId: string; shotId: string; ms?: number; message?: string }) => void;
}

export interface RunningShotWorker {
  readonly id: string;
  readonly record: WorkerRecord;
  readonly cache: ArtifactCache;
  /** Stops taking jobs, waits for running ones, closes pool and connections, leaves the registry. */
  close(): Promise<void>;
}

/** Starts a worker on the queue; resolves once it listens. */
export async function startShotWorker(options: ShotWorkerOptions): Promise<RunningShotWorker> {
  const concurrency = options.concurrency ?? 1;
  if (!(Number.isInteger(concurrency) && concurrency >= 1 && concurrency <= 256)) throw new RangeError(`concurrency must be a whole number from 1 to 256, got ${concurrency}`);
  const lockDuration = options.lockDurationMs ?? 30_000;
  if (!(lockDuration >= 200)) throw new RangeError(`lockDurationMs must be at least 200, got ${lockDuration}`);
  const cancelPollMs = options.cancelPollMs ?? 250;
  const heartbeatMs = options.heartbeatMs ?? 2000;
  const cache = new ArtifactCache(options.cacheBytes ?? 512 * 1024 * 1024);
  // The queue connection serves the registry and cancel keys (and checks Redis answers).
  const side = await openShotQueue(options.settings);
  const redis: RedisLike = await side.redis();
  const pool: WorkerPool = createWorkerPool(concurrency);
  const id = `${os.hostname()}-${process.pid}-${Date.now().toString(36)}`;
  const record: WorkerRecord = {
    id, host: os.hostname(), pid: process.pid, concurrency, tasksDone: 0, tasksFailed: 0, currentTasks: [], startedAt: Date.now(), lastHeardAt: Date.now(), fetches: 0, fetchedBytes: 0,
  };
  let closed = false;
  const publish = async () => {
    if (closed) return;
    record.lastHeardAt = Date.now();
    record.fetches = cache.fetches;
    record.fetchedBytes = cache.fetchedBytes;
    await redis.set(workerKey(id), JSON.stringify(record), { EX: WORKER_RECORD_TTL_S }).catch(() => undefined);
  };
  await publish();
  const heartbeat = setInterval(() => void publish(), heartbeatMs);

  const processor = async (job: Job<ShotJobData, ShotJobResult>): Promise<ShotJobResult> => {
    const data = job.data;
    const jobId = job.id ?? "?";
    if (!SHOT_TASK_NAMES.includes(data.task)) throw new UnrecoverableError(`unknown shot task "${String(data.task)}"`);
    const task: ShotTaskName = data.task;
    record.currentTasks.push(jobId);
    void publish();
    options.onEvent?.({ kind: "start", jobId, shotId: data.shotId });
    const started = performance.now();
    const flag = new Int32Array(new SharedArrayBuffer(4));
    let poll: NodeJS.Timeout | undefined;
    try {
      if (await redis.get(data.cancelKey)) throw new UnrecoverableError("cancelled before it started");
      const arg = withPath(joinParts(data.parts, cache), CANCEL_FLAG_PATH[task], flag);
      const fetched = performance.now();
      poll = setInterval(() => {
        redis.get(data.cancelKey).then(
          (v) => v && Atomics.store(flag, 0, 1),
          () => undefined,
        );
      }, cancelPollMs);
      let result: unknown;
      try {
        result = await pool.run(task, arg as never);
      } catch (err) {
        if (Atomics.load(flag, 0) !== 0) throw new UnrecoverableError("cancelled");
        throw err;
      }
      const computed = performance.now();
      // The job id inside makes the artifact this task's own: the coordinator deletes it once read.
      const written = writeArtifact({ jobId, result });
      const done = performance.now();
      record.tasksDone++;
      options.onEvent?.({ kind: "done", jobId, shotId: data.shotId, ms: done - started });
      return {
        resultHash: written.hash,
        worker: `${record.host}:${record.pid}`,
        fetchMs: fetched - started,
        computeMs: computed - fetched,
        writeMs: done - computed,
        fetches: cache.fetches,
        fetchedBytes: cache.fetchedBytes,
        resultBytes: written.sizeBytes,
      };
    } catch (err) {
      const cancelled = err instanceof UnrecoverableError && /cancelled/.test(err.message);
      if (!cancelled) record.tasksFailed++;
      options.onEvent?.({ kind: cancelled ? "cancelled" : "failed", jobId, shotId: data.shotId, ms: performance.now() - started, message: (err as Error).message });
      throw err;
    } finally {
      if (poll) clearInterval(poll);
      record.currentTasks = record.currentTasks.filter((j) => j !== jobId);
      void publish();
    }
  };

  const worker = new Worker<ShotJobData, ShotJobResult>(SHOT_QUEUE_NAME, processor, {
    connection: connectionFor(options.settings.url),
    concurrency,
    lockDuration,
    stalledInterval: options.stalledIntervalMs ?? lockDuration,
    // A job whose worker died twice is given up (the step then fails naming the shot).
    maxStalledCount: 2,
  });
  worker.on("error", () => undefined);
  await worker.waitUntilReady();

  return {
    id,
    record,
    cache,
    async close() {
      clearInterval(heartbeat);
      // Running tasks may finish for up to one lock duration; after that their locks have run out and
      // another worker takes them anyway (and a Redis that went away would make the wait endless).
      const pause = (ms: number) => new Promise<"late">((r) => setTimeout(() => r("late"), ms).unref());
      if ((await Promise.race([worker.close().then(() => "closed" as const), pause(lockDuration)])) === "late") {
        await Promise.race([worker.close(true), pause(2000)]);
      }
      closed = true;
      await Promise.race([redis.del(workerKey(id)).catch(() => undefined), pause(2000)]);
      await pool.close();
      await Promise.race([side.close(), pause(2000)]);
    },
  };
}

/** Every registered worker, most recently heard first. */
export async function listWorkers(redis: RedisLike): Promise<WorkerRecord[]> {
  const keys: string[] = [];
  let cursor = "0";
  do {
    const [next, batch] = await redis.scan(cursor, { MATCH: `${KEY_PREFIX}:worker:*`, COUNT: 200 });
    keys.push(...batch);
    cursor = next;
  } while (cursor !== "0");
  const records: WorkerRecord[] = [];
  for (const k of keys) {
    const text = await redis.get(k);
    if (!text) continue;
    try {
      records.push(JSON.parse(text) as WorkerRecord);
    } catch {
      // a foreign or half-written key: not a worker
    }
  }
  return records.sort((a, b) => b.lastHeardAt - a.lastHeardAt);
}

/** A worker not heard from for this long is shown as silent (stopped or cut off). */
export const WORKER_SILENT_AFTER_MS = 10_000;
