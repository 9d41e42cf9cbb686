/**
 * The lease of an executing run: the process that claimed a queued run owns it while the run is
 * "running" with its process id. While it runs, the lease writes a heartbeat, polls for a cancel
 * request and checks ownership; if another door marked the run interrupted (say the heartbeat
 * stalled) and someone resumed it, the lease aborts and the process writes nothing more.
 * At start-up every door marks runs whose process is gone as interrupted.
 */
import { setMaxListeners } from "node:events";
import type { Db } from "../db/client";
import {
  claimQueuedRun,
  finishOwnedRun,
  isCancelRequested,
  isRunOwnedBy,
  markRunInterrupted,
  writeHeartbeat,
  type RunRecord,
  type StoppedStep,
} from "../db/queries/run-records";
import { runsWithStatus } from "../db/queries/runs";
import { AppError } from "./errors";

/** How often an executing run writes its heartbeat, ms. */
const HEARTBEAT_EVERY_MS = 10_000;
/** A heartbeat older than this marks a run as interrupted even if its process id is in use, ms. */
export const HEARTBEAT_STALE_MS = 10 * 60_000;

export interface RunLease {
  /** Aborted on a cancel request, a lost lease or the caller's own signal. */
  signal: AbortSignal;
  /** Whether this process still owns the run (asks the database). */
  stillOwned(): boolean;
  /** Throws an AbortError when the run is no longer ours. */
  ensureOwned(): void;
  /** True once the lease was found lost. */
  readonly lost: boolean;
  /**
   * Records the end of the run if still ours (with the step that stopped it, in one transaction);
   * false when it was taken over. Stops polling. Only the first call writes: later calls return
   * its answer, so a step that stopped the run can end it at once and the runner's own call after
   * it changes nothing.
   */
  finish(outcome: { status: "succeeded" | "failed" | "cancelled"; error?: string }, stoppedStep?: StoppedStep): boolean;
  /** True once finish() recorded the run's end. */
  readonly finished: boolean;
  /** Stops polling (idempotent). */
  release(): void;
}

/** The error recorded on a cancelled run. */
export const RUN_CANCELLED_MESSAGE = "The run was cancelled.";

export function abortError(): Error {
  return Object.assign(new Error("cancelled"), { name: "AbortError" });
}

/** Claims a queued run for this process; throws "conflict" when another process was first. */
export function claimRun(db: Db, run: RunRecord, opts: { signal?: AbortSignal; cancelPollMs?: number } = {}): RunLease {
  const pid = process.pid;
  if (!claimQueuedRun(db, run.id, pid, run.startedAt ?? new Date())) {
    throw new AppError("conflict", `Run ${run.id} was taken by another process`);
  }
  const controller = new AbortController();
  // Steps hand the signal to one pool task per shot or trace block: many listeners are normal.
  setMaxListeners(0, controller.signal);
  const onOuterAbort = () => controller.abort();
  opts.signal?.addEventListener("abort", onOuterAbort);
  if (opts.signal?.aborted) controller.abort();

  let lost = false;
  const stillOwned = (): boolean => {
    const owned = isRunOwnedBy(db, run.id, pid);
    if (!owned) lost = true;
    return owned;
  };
  let lastHeartbeat = Date.now();
  const poll = setInterval(() => {
    try {
      if (isCancelRequested(db, run.id)) controller.abort();
      if (!stillOwned()) controller.abort();
      if (Date.now() - lastHeartbeat > HEARTBEAT_EVERY_MS) {
        lastHeartbeat = Date.now();
        writeHeartbeat(db, run.id, pid, new Date(lastHeartbeat));
      }
    } catch {
      // transient lock: try again next tick
    }
  }, opts.cancelPollMs ?? 300);
  let released = false;
  let finishedAnswer: boolean | null = null;
  const release = () => {
    if (released) return;
    released = true;
    clearInterval(poll);
    opts.signal?.removeEventListener("abort", onOuterAbort);
  };

  return {
    signal: controller.signal,
    stillOwned,
    ensureOwned: () => {
      if (!stillOwned()) throw abortError();
    },
    get lost() {
      return lost;
    },
    get finished() {
      return finishedAnswer === true;
    },
    finish(outcome, stoppedStep) {
      release();
      if (finishedAnswer !== null) return finishedAnswer;
      finishedAnswer = lost || !stillOwned() ? false : finishOwnedRun(db, run.id, pid, outcome, stoppedStep);
      return finishedAnswer;
    },
    release,
  };
}

function pidAlive(pid: number | null): boolean {
  if (!pid) return false;
  if (pid === process.pid) return true;
  try {
    process.kill(pid, 0);
    return true;
  } catch (err) {
    return (err as NodeJS.ErrnoException).code === "EPERM";
  }
}

/**
 * Marks runs left "running" by a process that no longer exists as interrupted. Every door
 * calls this at start-up. Returns the ids marked.
 */
export function markInterruptedRuns(db: Db, now = Date.now()): number[] {
  const marked: number[] = [];
  for (const r of runsWithStatus(db, "running")) {
    // A live process id is not enough: after a restart another process may hold it. A run whose
    // process has not written its heartbeat for HEARTBEAT_STALE_MS is taken as dead too.
    const stale = r.heartbeatAt !== null && now - r.heartbeatAt.getTime() > HEARTBEAT_STALE_MS;
    if (pidAlive(r.hostPid) && !stale) continue;
    markRunInterrupted(db, r.id);
    marked.push(r.id);
  }
  return marked;
}
