/**
 * One step of an executing run: served from the cache when an earlier run step with the same
 * cache key left its outputs, else computed with a StepContext, its outputs checked, written as
 * artifacts and recorded. Both return the step's outputs (slot → artifact hash).
 */
import type { Db } from "../db/client";
import { registerArtifact } from "../db/queries/artifacts";
import {
  recordRejectedFiles,
  recordStepCacheHit,
  recordStepProgress,
  recordStepRunning,
  recordStepStopped,
  recordStepSucceeded,
  runIdOfStep,
  type RunStepRecord,
  type StepStart,
} from "../db/queries/run-records";
import { writeArtifact } from "./artifact-store";
import { findReusableResult } from "./cache";
import { AppError, toAppError } from "./errors";
import { createRunLogger } from "./logger";
import { checkStepOutputs } from "./output-checks";
import { abortError, RUN_CANCELLED_MESSAGE, type RunLease } from "./run-lease";
import type { AnyStepDefinition, StepContext, StepResult } from "./step";
import { createStepRecorder } from "./step-records";
import type { SlotValues } from "./types";
import type { WorkerPool } from "./workers/pool";
import type { ShotExecutor } from "./workers/shot-executor";

/** Everything a door may want to show while a run goes. */
export interface RunEvents {
  onRunStart?: (e: { runId: number; steps: Array<{ label: string; stepId: string }> }) => void;
  onStepStart?: (e: { position: number; label: string; stepId: string; total: number }) => void;
  onStepProgress?: (e: { position: number; label: string; fraction: number; message?: string }) => void;
  onStepEnd?: (e: {
    position: number;
    label: string;
    status: "succeeded" | "failed" | "cancelled";
    cacheHit: boolean;
    durationMs: number;
    error?: string;
  }) => void;
  onLog?: (e: { label: string | null; level: string; message: string }) => void;
}

/** What every step of one run shares. */
export interface RunScope {
  db: Db;
  runId: number;
  lease: RunLease;
  events: RunEvents;
  total: number;
  pool: () => WorkerPool;
  /** Where a step's per-shot work runs (the local pool, or the job queue); absent: the local pool. */
  shots?: (stepLabel: string, signal: AbortSignal) => Promise<ShotExecutor>;
}

/** Records the step as a cache hit and returns the reused outputs, or null when nothing can be reused. */
export function reuseCachedResult(scope: RunScope, row: RunStepRecord, start: StepStart): Record<string, string> | null {
  const cached = findReusableResult(scope.db, start.cacheKey);
  if (!cached) return null;
  scope.events.onStepStart?.({ position: row.position, label: row.label, stepId: row.stepId, total: scope.total });
  recordStepCacheHit(scope.db, row.id, start, cached);
  const sourceRun = runIdOfStep(scope.db, cached.sourceId);
  createRunLogger(scope.db, scope.runId, row.id).info(`reused the result of run ${sourceRun ?? "?"} (same step, settings and inputs)`);
  const durationMs = Date.now() - start.startedAt.getTime();
  scope.events.onStepEnd?.({ position: row.position, label: row.label, status: "succeeded", cacheHit: true, durationMs });
  return JSON.parse(cached.outputsJson) as Record<string, string>;
}

/** Runs the step, records it and returns its outputs (hashes) and decoded values; throws on failure or cancel. */
export async function computeStep(
  scope: RunScope,
  row: RunStepRecord,
  step: AnyStepDefinition,
  params: Record<string, unknown>,
  input: Partial<SlotValues>,
  start: StepStart,
): Promise<{ outputs: Record<string, string>; values: Partial<SlotValues> }> {
  const { db, events, lease } = scope;
  const started = start.startedAt.getTime();
  events.onStepStart?.({ position: row.position, label: row.label, stepId: row.stepId, total: scope.total });
  recordStepRunning(db, row.id, start);
  const log = createRunLogger(db, scope.runId, row.id, { echo: (level, message) => events.onLog?.({ label: row.label, level, message }) });
  const recorder = createStepRecorder(db, {
    runStepId: row.id,
    cacheKey: start.cacheKey,
    label: row.label,
    existingSeriesJson: row.seriesJson,
    ensureOwned: lease.ensureOwned,
  });
  let lastProgressWrite = 0;
  const ctx: StepContext = {
    log,
    signal: lease.signal,
    progress: (fraction, message) => {
      const f = Math.min(1, Math.max(0, Number.isFinite(fraction) ? fraction : 0));
      events.onStepProgress?.({ position: row.position, label: row.label, fraction: f, message });
      const now = Date.now();
      if (now - lastProgressWrite > 250 || f >= 1) {
        lastProgressWrite = now;
        try {
          recordStepProgress(db, row.id, f, message ?? null);
        } catch {
          // progress is best effort
        }
      }
    },
    get pool() {
      return scope.pool();
    },
    recordIntermediate: recorder.recordIntermediate,
    extendSeries: recorder.extendSeries,
    saveCheckpoint: recorder.saveCheckpoint,
    loadCheckpoint: recorder.loadCheckpoint,
  };
  let result: StepResult;
  const outputs: Record<string, string> = {};
  try {
    if (scope.shots) ctx.shots = await scope.shots(row.label, lease.signal);
    result = await step.run(input, params as never, ctx);
    checkStepOutputs(step, result.outputs);
    lease.ensureOwned();
    for (const [slot, value] of Object.entries(result.outputs)) {
      if (value === undefined) continue;
      const written = writeArtifact(value);
      registerArtifact(db, { hash: written.hash, kind: slot, path: written.relativePath, sizeBytes: written.sizeBytes, producedByRunStepId: row.id });
      outputs[slot] = written.hash;
    }
  } catch (err) {
    const e = lease.signal.aborted ? toAppError(abortError()) : toAppError(err);
    const status = e.code === "cancelled" ? "cancelled" : "failed";
    const message = status === "cancelled" ? "cancelled" : `${row.label}: ${e.message}`;
    if (status === "failed") log.error({ code: e.code }, e.message);
    if (!lease.lost) {
      recorder.flush();
      // A cancelled step ends the run with it, in one transaction: the run's record says
      // "cancelled" the moment the step's does (the runner's later finish changes nothing).
      if (status === "cancelled") {
        lease.finish({ status: "cancelled", error: RUN_CANCELLED_MESSAGE }, { runStepId: row.id, status, error: message, durationMs: Date.now() - started });
      } else recordStepStopped(db, row.id, status, message, Date.now() - started);
    }
    events.onStepEnd?.({ position: row.position, label: row.label, status, cacheHit: false, durationMs: Date.now() - started, error: message });
    throw status === "cancelled" ? e : new AppError(e.code === "internal" ? "step-failed" : e.code, message, e.details, { cause: err });
  }
  const durationMs = Date.now() - started;
  const series = recorder.mergeSeries(result.series);
  recordStepSucceeded(db, row.id, {
    outputsJson: JSON.stringify(outputs),
    summaryJson: result.summary ? JSON.stringify(result.summary) : null,
    seriesJson: series ? JSON.stringify(series) : null,
    durationMs,
  });
  if (result.rejectedFiles?.length) recordRejectedFiles(db, scope.runId, result.rejectedFiles);
  log.info(`done in ${(durationMs / 1000).toFixed(2)} s`);
  events.onStepEnd?.({ position: row.position, label: row.label, status: "succeeded", cacheHit: false, durationMs });
  return { outputs, values: result.outputs };
}
