/**
 * Server reads of the job queue for pages: the registered workers and a run's shot tasks, when
 * TRACEWRIGHT_REDIS_URL is set (without it shot work runs in each run's own process and there is
 * nothing to list). Each read opens a short connection and closes it.
 */
import "server-only";
import { listWorkers, WORKER_SILENT_AFTER_MS } from "@/pipeline/workers/queue-worker";
import { listRunShotTasks, openShotQueue, queueSettingsFromEnv, type ShotQueue, type ShotTaskRow } from "@/pipeline/workers/shot-queue";

/** A worker as the workers page shows it. */
export interface WorkerView {
  id: string;
  host: string;
  pid: number;
  concurrency: number;
  tasksDone: number;
  tasksFailed: number;
  currentTasks: string[];
  lastHeardAt: number;
  /** Since the last heartbeat, ms, at the time of the read. */
  heardMsAgo: number;
  silent: boolean;
}

/** What the pages know of the queue: not set up, unreachable (with why), or its answer. */
export type QueueRead<T> = { state: "local" } | { state: "unreachable"; url: string; message: string } | { state: "ok"; url: string; value: T };

/** The URL without a password, for pages. */
function shownUrl(url: string): string {
  try {
    const u = new URL(url);
    if (u.password) u.password = "***";
    return u.toString();
  } catch {
    return "(unreadable URL)";
  }
}

async function withQueue<T>(read: (q: ShotQueue) => Promise<T>): Promise<QueueRead<T>> {
  let settings;
  try {
    settings = queueSettingsFromEnv();
  } catch (err) {
    return { state: "unreachable", url: "", message: (err as Error).message };
  }
  if (!settings) return { state: "local" };
  const url = shownUrl(settings.url);
  let queue: ShotQueue | undefined;
  try {
    // A page must not hang on a queue that went away.
    queue = await openShotQueue(settings, { answerWithinMs: 2000 });
    return { state: "ok", url, value: await read(queue) };
  } catch (err) {
    return { state: "unreachable", url, message: (err as Error).message };
  } finally {
    await queue?.close();
  }
}

/** The registered workers, most recently heard first. */
export function readQueueWorkers(): Promise<QueueRead<WorkerView[]>> {
  return withQueue(async (q) => {
    const now = Date.now();
    return (await listWorkers(await q.redis())).map((w) => ({
      id: w.id, host: w.host, pid: w.pid, concurrency: w.concurrency, tasksDone: w.tasksDone, tasksFailed: w.tasksFailed,
      currentTasks: w.currentTasks, lastHeardAt: w.lastHeardAt, heardMsAgo: now - w.lastHeardAt, silent: now - w.lastHeardAt > WORKER_SILENT_AFTER_MS,
    }));
  });
}

/** The run's shot tasks still on the queue (kept a day after they finish). */
export function readRunShotTasks(runId: number): Promise<QueueRead<ShotTaskRow[]>> {
  return withQueue((q) => listRunShotTasks(q, runId));
}
