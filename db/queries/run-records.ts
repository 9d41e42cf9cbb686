/**
 * Writes of the engine to runs and run_steps, and the reads it needs while a run executes:
 * creating a run with its steps, the lease (claim, ownership, heartbeat, cancel flag), each
 * step's record, the end of a run, resume and cancel. Reads for people are in runs.ts.
 */
import { and, eq, inArray } from "drizzle-orm";
import { writeTransaction, type Db } from "../client";
import { RecordError } from "../errors";
import { rejectedFiles, runSteps, runs } from "../schema";
import { recordAudit, type Actor } from "./audit";
import { queueRunEndNotices } from "./notices";

export type RunRecord = typeof runs.$inferSelect;
export type RunStepRecord = typeof runSteps.$inferSelect;

/** The run row, or a RecordError "not-found". */
export function getRunRecord(db: Db, runId: number): RunRecord {
  const run = db.select().from(runs).where(eq(runs.id, runId)).get();
  if (!run) throw new RecordError("not-found", `Run ${runId} does not exist`, "runId");
  return run;
}

/** The steps of a run in order. */
export function getRunStepRecords(db: Db, runId: number): RunStepRecord[] {
  return db.select().from(runSteps).where(eq(runSteps.runId, runId)).orderBy(runSteps.position).all();
}

/** The run a run step belongs to. */
export function runIdOfStep(db: Db, runStepId: number): number | null {
  return db.select({ runId: runSteps.runId }).from(runSteps).where(eq(runSteps.id, runStepId)).get()?.runId ?? null;
}

export interface NewRun {
  pipelineVersionId: number;
  datasetId: number;
  actor: Actor;
  steps: Array<{ label: string; stepId: string; stepVersion: number; paramsJson: string }>;
  parentRunId: number | null;
  rerunFromStep: string | null;
  overrides: Record<string, Record<string, unknown>>;
  geometryTableHash: string | null;
}

/** Inserts a queued run with its steps and its audit line ("run.start" or "run.rerun"), in one transaction. */
export function insertQueuedRun(db: Db, r: NewRun): number {
  return writeTransaction(db, (tx) => {
    const run = tx
      .insert(runs)
      .values({
        pipelineVersionId: r.pipelineVersionId,
        datasetId: r.datasetId,
        geometryTableHash: r.geometryTableHash,
        parentRunId: r.parentRunId,
        rerunFromStep: r.rerunFromStep,
        overridesJson: JSON.stringify(r.overrides),
        startedByUserId: r.actor.userId,
        startedByLabel: r.actor.label,
        door: r.actor.door,
        status: "queued",
        createdAt: new Date(),
      })
      .returning({ id: runs.id })
      .get();
    r.steps.forEach((s, position) => {
      tx.insert(runSteps)
        .values({ runId: run.id, position, label: s.label, stepId: s.stepId, stepVersion: s.stepVersion, paramsJson: s.paramsJson })
        .run();
    });
    recordAudit(tx, {
      actor: r.actor,
      action: r.parentRunId ? "run.rerun" : "run.start",
      entityType: "run",
      entityId: run.id,
      after: {
        pipelineVersionId: r.pipelineVersionId,
        datasetId: r.datasetId,
        parentRunId: r.parentRunId,
        rerunFromStep: r.rerunFromStep,
        overrides: r.overrides,
        geometryTableHash: r.geometryTableHash,
      },
    });
    return run.id;
  });
}

/** Records the geometry table a run uses (runs recorded before tables were kept take it once). */
export function setRunGeometryTable(db: Db, runId: number, hash: string): void {
  db.update(runs).set({ geometryTableHash: hash }).where(eq(runs.id, runId)).run();
}

// The lease: a run is owned by the process whose pid it records while it is "running".

const ownedBy = (runId: number, pid: number) => and(eq(runs.id, runId), eq(runs.status, "running"), eq(runs.hostPid, pid));

/** Moves a queued run to running under `pid`; false when another process took it first. */
export function claimQueuedRun(db: Db, runId: number, pid: number, startedAt: Date): boolean {
  const claimed = db
    .update(runs)
    .set({ status: "running", hostPid: pid, heartbeatAt: new Date(), startedAt, error: null })
    .where(and(eq(runs.id, runId), eq(runs.status, "queued")))
    .run();
  return claimed.changes === 1;
}

/** Whether the run is still running under `pid`. */
export function isRunOwnedBy(db: Db, runId: number, pid: number): boolean {
  return Boolean(db.select({ id: runs.id }).from(runs).where(ownedBy(runId, pid)).get());
}

/** Whether someone asked the run to stop. */
export function isCancelRequested(db: Db, runId: number): boolean {
  return Boolean(db.select({ c: runs.cancelRequested }).from(runs).where(eq(runs.id, runId)).get()?.c);
}

/** Writes the heartbeat of a run this process owns. */
export function writeHeartbeat(db: Db, runId: number, pid: number, at: Date): void {
  db.update(runs).set({ heartbeatAt: at }).where(ownedBy(runId, pid)).run();
}

/** Marks a running run interrupted, and its running step cancelled; queues the notice to whoever started it. */
export function markRunInterrupted(db: Db, runId: number): void {
  writeTransaction(db, (tx) => {
    const done = tx
      .update(runs)
      .set({ status: "interrupted", error: "The process running this run stopped before it finished.", finishedAt: new Date() })
      .where(and(eq(runs.id, runId), eq(runs.status, "running")))
      .run();
    if (done.changes > 0) queueRunEndNotices(tx, runId);
    tx.update(runSteps)
      .set({ status: "cancelled", error: "interrupted" })
      .where(and(eq(runSteps.runId, runId), eq(runSteps.status, "running")))
      .run();
  });
}

/** The step that stopped the run, recorded in the same transaction as the run's end. */
export interface StoppedStep {
  runStepId: number;
  status: "failed" | "cancelled";
  error: string;
  durationMs: number;
}

/**
 * Ends a run this process owns: its status and error, and steps still waiting marked cancelled
 * (cancelled run) or skipped (failed run), and the mail notices of its end (a failed run to whoever
 * started it, a succeeded one to the survey's leads for review). With `stoppedStep`, that step's end
 * is written in the same transaction, so no reader sees the step stopped while the run still runs.
 * False when the run was no longer ours (then nothing is written).
 */
export function finishOwnedRun(
  db: Db,
  runId: number,
  pid: number,
  outcome: { status: "succeeded" | "failed" | "cancelled"; error?: string },
  stoppedStep?: StoppedStep,
): boolean {
  return writeTransaction(db, (tx) => {
    const done = tx
      .update(runs)
      .set({ status: outcome.status, error: outcome.error ?? null, finishedAt: new Date() })
      .where(ownedBy(runId, pid))
      .run();
    if (done.changes === 0) return false;
    if (stoppedStep) {
      tx.update(runSteps)
        .set({ status: stoppedStep.status, error: stoppedStep.error, finishedAt: new Date(), durationMs: stoppedStep.durationMs })
        .where(and(eq(runSteps.id, stoppedStep.runStepId), eq(runSteps.runId, runId)))
        .run();
    }
    queueRunEndNotices(tx, runId);
    if (outcome.status !== "succeeded") {
      tx.update(runSteps)
        .set({ status: outcome.status === "cancelled" ? "cancelled" : "skipped" })
        .where(and(eq(runSteps.runId, runId), eq(runSteps.status, "waiting")))
        .run();
    }
    return true;
  });
}

/** Puts an interrupted, failed or cancelled run back in the queue; finished steps stay. */
export function requeueRun(db: Db, runId: number, actor: Actor, before: RunRecord["status"]): void {
  writeTransaction(db, (tx) => {
    tx.update(runs).set({ status: "queued", error: null, cancelRequested: false, finishedAt: null }).where(eq(runs.id, runId)).run();
    tx.update(runSteps)
      .set({ status: "waiting", error: null, progress: 0, progressMessage: null })
      .where(and(eq(runSteps.runId, runId), inArray(runSteps.status, ["failed", "cancelled", "running", "skipped"])))
      .run();
    recordAudit(tx, { actor, action: "run.resume", entityType: "run", entityId: runId, before: { status: before } });
  });
}

/** Records a cancel request: a queued run is cancelled at once, a running one is flagged for its process. */
export function recordCancelRequest(db: Db, runId: number, actor: Actor, before: RunRecord["status"]): void {
  writeTransaction(db, (tx) => {
    if (before === "queued") {
      tx.update(runs).set({ status: "cancelled", cancelRequested: true, finishedAt: new Date() }).where(eq(runs.id, runId)).run();
      tx.update(runSteps).set({ status: "cancelled" }).where(and(eq(runSteps.runId, runId), eq(runSteps.status, "waiting"))).run();
    } else {
      tx.update(runs).set({ cancelRequested: true }).where(eq(runs.id, runId)).run();
    }
    recordAudit(tx, { actor, action: "run.cancel", entityType: "run", entityId: runId, before: { status: before } });
  });
}

// One step's record.

export interface StepStart {
  cacheKey: string;
  stepVersion: number;
  paramsJson: string;
  inputsJson: string;
  startedAt: Date;
}

/** A step served from the cache: the source step's outputs, summary and series. */
export function recordStepCacheHit(db: Db, runStepId: number, start: StepStart, source: RunStepRecord & { sourceId: number }): void {
  db.update(runSteps)
    .set({
      ...start,
      status: "succeeded",
      cacheHit: true,
      cacheSourceStepId: source.sourceId,
      outputsJson: source.outputsJson,
      summaryJson: source.summaryJson,
      seriesJson: source.seriesJson,
      progress: 1,
      finishedAt: new Date(),
      durationMs: Date.now() - start.startedAt.getTime(),
    })
    .where(eq(runSteps.id, runStepId))
    .run();
}

/** A step about to run. */
export function recordStepRunning(db: Db, runStepId: number, start: StepStart): void {
  db.update(runSteps)
    .set({ ...start, status: "running", progress: 0 })
    .where(eq(runSteps.id, runStepId))
    .run();
}

/** Progress of a running step (best effort: callers ignore a busy database). */
export function recordStepProgress(db: Db, runStepId: number, progress: number, message: string | null): void {
  db.update(runSteps).set({ progress, progressMessage: message }).where(eq(runSteps.id, runStepId)).run();
}

/** A step that failed or was cancelled. */
export function recordStepStopped(db: Db, runStepId: number, status: "failed" | "cancelled", error: string, durationMs: number): void {
  db.update(runSteps).set({ status, error, finishedAt: new Date(), durationMs }).where(eq(runSteps.id, runStepId)).run();
}

/** A step that finished: its outputs (slot → artifact hash), summary and series. */
export function recordStepSucceeded(
  db: Db,
  runStepId: number,
  r: { outputsJson: string; summaryJson: string | null; seriesJson: string | null; durationMs: number },
): void {
  db.update(runSteps)
    .set({ ...r, status: "succeeded", progress: 1, finishedAt: new Date() })
    .where(eq(runSteps.id, runStepId))
    .run();
}

/** Field files a step refused (the run went on without them). */
export function recordRejectedFiles(db: Db, runId: number, files: Array<{ file: string; reason: string }>): void {
  for (const r of files) db.insert(rejectedFiles).values({ runId, name: r.file, reason: r.reason }).onConflictDoNothing().run();
}
