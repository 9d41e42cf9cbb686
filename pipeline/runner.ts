/**
 * The runner: executes a queued run step by step. Each concern has its own module:
 *   run-create.ts   creating runs (every door), resume and cancel requests
 *   run-lease.ts    claim, heartbeat, ownership, cancel polling, interrupted runs
 *   slots.ts        the slot table: outputs per producing step, default and explicit inputs
 *   cache.ts        cache keys and reusable results
 *   run-step.ts     one step: cache hit, or computed with its StepContext and recorded
 *   step-records.ts intermediate results, live series and checkpoints of a running step
 *   db/queries/run-records.ts every write to runs and run_steps
 */
import type { Db } from "../db/client";
import { getPipelineVersion } from "../db/queries/pipelines";
import { getDataset } from "../db/queries/datasets";
import { getRunRecord, getRunStepRecords, setRunGeometryTable, type RunRecord } from "../db/queries/run-records";
import { canonicalJson } from "./artifact-codec";
import { ensureDiskReserve } from "./artifact-store";
import { stepCacheKey } from "./cache";
import { AppError, toAppError } from "./errors";
import { createRunLogger } from "./logger";
import type { ResolvedPipeline } from "./pipeline-file";
import { getStep } from "./registry";
import { snapshotGeometryTable } from "./run-create";
import { abortError, claimRun, RUN_CANCELLED_MESSAGE } from "./run-lease";
import { computeStep, reuseCachedResult, type RunScope } from "./run-step";
import { loadFieldFiles, SlotTable } from "./slots";
import { restoreUploadedDataset } from "./uploads";
import { sharedWorkerPool, type WorkerPool } from "./workers/pool";
import type { RunEvents } from "./run-step";
import { localShotExecutor } from "./workers/shot-executor";
import { queueSettingsFromEnv, queueShotExecutor, sharedShotQueue } from "./workers/shot-queue";
import { listWorkers, WORKER_SILENT_AFTER_MS } from "./workers/queue-worker";

export type { RunEvents };

export { createRun, defaultActor, prepareResume, requestCancel, snapshotGeometryTable, type Actor, type RunRequest } from "./run-create";
export { HEARTBEAT_STALE_MS, markInterruptedRuns } from "./run-lease";


export interface ExecuteOptions {
  pool?: WorkerPool;
  /** Aborting it cancels the run (Ctrl-C in the CLI). */
  signal?: AbortSignal;
  events?: RunEvents;
  /** How often to look for a cancel request in the database, ms. */
  cancelPollMs?: number;
}

export interface RunOutcome {
  runId: number;
  status: "succeeded" | "failed" | "cancelled";
  error?: string;
}

/** Executes a queued run to the end (or failure, or cancel). */
export async function executeRun(db: Db, runId: number, opts: ExecuteOptions = {}): Promise<RunOutcome> {
  const run = getRunRecord(db, runId);
  if (run.status !== "queued") throw new AppError("conflict", `Run ${runId} is ${run.status}, not queued`);
  const { definition, title } = pipelineDefinition(db, run);
  const explicitInputs = new Map(definition.steps.map((s) => [s.label, s.inputs]));
  const steps = getRunStepRecords(db, runId);
  const events = opts.events ?? {};
  const lease = claimRun(db, run, opts);
  ensureDiskReserve();
  const runLog = createRunLogger(db, runId, null, { echo: (level, message) => events.onLog?.({ label: null, level, message }) });
  events.onRunStart?.({ runId, steps: steps.map((s) => ({ label: s.label, stepId: s.stepId })) });
  let pool = opts.pool;
  const scope: RunScope = {
    db,
    runId,
    lease,
    events,
    total: steps.length,
    pool: () => (pool ??= sharedWorkerPool()),
    // With TRACEWRIGHT_REDIS_URL, per-shot work goes to the job queue; else the local pool runs it.
    shots: async (stepLabel, signal) => {
      const queueSettings = queueSettingsFromEnv();
      if (!queueSettings) return localShotExecutor(scope.pool);
      const queue = await sharedShotQueue(queueSettings);
      const live = (await listWorkers(await queue.redis())).filter((w) => Date.now() - w.lastHeardAt < WORKER_SILENT_AFTER_MS);
      if (live.length === 0) runLog.warn(`no queue worker is heard from at ${queueSettings.url}: shot tasks of ${stepLabel} wait until one starts (tracewright worker)`);
      return queueShotExecutor(queue, { runId, step: stepLabel, signal });
    },
  };
  const slots = new SlotTable();
  let outcome: RunOutcome = { runId, status: "succeeded" };
  try {
    // A dataset made from an upload whose folder lost files gets them back from where they were kept.
    const restored = definition.fieldDataPath !== null ? await restoreUploadedDataset(db, run.datasetId) : [];
    if (restored.length > 0) runLog.info(`${restored.length} field file${restored.length === 1 ? "" : "s"} of dataset ${run.datasetId} put back from the uploads' store: ${restored.join(", ")}`);
    fillRunnerSlots(db, run, definition, slots);
    runLog.info(`run ${runId} started: ${title}, ${steps.length} steps`);
    for (const row of steps) {
      if (row.status === "succeeded") {
        slots.recordOutputs(row.label, JSON.parse(row.outputsJson) as Record<string, string>);
        continue;
      }
      if (lease.signal.aborted) throw abortError();
      const step = getStep(row.stepId);
      const params = step.params.parse(JSON.parse(row.paramsJson)) as Record<string, unknown>;
      const inputs = slots.resolveInputs(row.label, step, explicitInputs.get(row.label));
      const start = {
        cacheKey: stepCacheKey(step, params, inputs),
        stepVersion: step.version,
        paramsJson: canonicalJson(params),
        inputsJson: JSON.stringify(inputs),
        startedAt: new Date(),
      };
      const reused = reuseCachedResult(scope, row, start);
      if (reused) slots.recordOutputs(row.label, reused);
      else {
        const computed = await computeStep(scope, row, step, params, slots.load(inputs), start);
        slots.recordOutputs(row.label, computed.outputs, computed.values);
      }
    }
  } catch (err) {
    const e = lease.signal.aborted ? new AppError("cancelled", RUN_CANCELLED_MESSAGE) : toAppError(err);
    outcome = { runId, status: e.code === "cancelled" ? "cancelled" : "failed", error: e.message };
    if (e.code === "internal") runLog.error({ stack: (err as Error)?.stack }, e.message);
    else runLog.warn(e.message);
  }
  if (!lease.finish(outcome)) {
    runLog.warn(`run ${runId} was marked interrupted or taken over by another process; this process stopped without recording more`);
    return { runId, status: "cancelled", error: "taken over by another process" };
  }
  runLog.info(`run ${runId} ${outcome.status}`);
  return outcome;
}

function pipelineDefinition(db: Db, run: RunRecord): { definition: ResolvedPipeline; title: string } {
  const pv = getPipelineVersion(db, run.pipelineVersionId);
  if (!pv) throw new AppError("not-found", `Pipeline version ${run.pipelineVersionId} does not exist`);
  return { definition: JSON.parse(pv.version.definitionJson) as ResolvedPipeline, title: `${pv.pipeline.name} v${pv.version.version}` };
}

/** The slots the runner fills from disk: the dataset's field files and the run's geometry table. */
function fillRunnerSlots(db: Db, run: RunRecord, definition: ResolvedPipeline, slots: SlotTable): void {
  const dataset = getDataset(db, run.datasetId);
  if (definition.fieldDataPath !== null && dataset && dataset.folderPath) {
    slots.setRunnerSlot("fieldFiles", dataset.contentHash, () => loadFieldFiles(db, run.datasetId));
  }
  // Runs recorded before tables were kept (and their reruns) take the table as it is now, once.
  const tableHash = run.geometryTableHash ?? snapshotGeometryTable(db, definition.geometryTablePath, dataset?.folderPath || null);
  if (tableHash) {
    if (!run.geometryTableHash) setRunGeometryTable(db, run.id, tableHash);
    slots.setRunnerSlot("geometryTable", tableHash);
  }
}
