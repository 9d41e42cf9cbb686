/**
 * The runner: creates run records, executes runs step by step with content-addressed caching,
 * records everything in SQLite, streams progress and logs, handles cancel, failure, crashes
 * (interrupted runs) and resume.
 */
import fs from "node:fs";
import { setMaxListeners } from "node:events";
import path from "node:path";
import { and, eq, inArray } from "drizzle-orm";
import { writeTransaction, type Db } from "../db/client";
import { artifacts, rejectedFiles, runSteps, runs, type Door } from "../db/schema";
import { recordAudit, type Actor } from "../db/queries/audit";
import { ensureDataset, getDataset, listDatasetFiles } from "../db/queries/datasets";
import { getPipelineVersion, savePipelineVersion } from "../db/queries/pipelines";
import { findCachedStep, runsWithStatus } from "../db/queries/runs";
import { ensureSurvey } from "../db/queries/surveys";
import { canonicalJson } from "./artifact-codec";
import { hasArtifact, readArtifactSync, writeArtifact } from "./artifact-store";
import { scanFolder } from "./dataset-folder";
import { AppError, toAppError } from "./errors";
import { sha256Hex } from "./hash";
import { createRunLogger } from "./logger";
import { applyOverrides, loadPipelineFile, type ResolvedPipeline, type ResolvedStep } from "./pipeline-file";
import { getStep } from "./registry";
import type { StepContext, StepResult, StepSeries } from "./step";
import { createStepRecorder } from "./step-records";
import type { FieldFileSet, SlotName, SlotValues } from "./types";
import { sharedWorkerPool, type WorkerPool } from "./workers/pool";

export type { Actor };

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

/** Hash of the pipeline definition and its text: same content, same version. */
function pipelineContentHash(text: string, resolved: ResolvedPipeline): string {
  return sha256Hex(canonicalJson({ text, resolved }));
}

/**
 * Records a pipeline file (a new version if changed) and the dataset of its field folder
 * (or `fieldDataOverride`), without running anything.
 */
export function registerPipelineAndDataset(
  db: Db,
  opts: { pipelinePath: string; fieldDataOverride?: string; actor: Actor },
) {
  const { resolved, text, absolutePath } = loadPipelineFile(opts.pipelinePath);
  const { survey, profile } = ensureSurvey(db, resolved.survey, resolved.profile);
  const { version } = savePipelineVersion(db, {
    name: resolved.name,
    surveyId: survey.id,
    sourceText: text,
    sourcePath: absolutePath,
    definition: resolved,
    contentHash: pipelineContentHash(text, resolved),
    actor: opts.actor,
  });
  const folder = opts.fieldDataOverride ? path.resolve(opts.fieldDataOverride) : resolved.fieldDataPath;
  const scanned = folder ? scanFolder(folder) : { files: [], contentHash: sha256Hex("") };
  const dataset = ensureDataset(db, {
    folderPath: folder ?? "",
    contentHash: scanned.contentHash,
    files: scanned.files,
    surveyId: survey.id,
    profileId: profile?.id ?? null,
    name: folder ? `${resolved.profile ?? resolved.survey} ${path.basename(folder)}` : `${resolved.name} (no field data)`,
  });
  return { resolved, pipelineVersionId: version.id, pipelineVersion: version.version, dataset };
}

/** Creates a queued run with its steps. Parameters come from `steps` (already validated). */
export function createRun(
  db: Db,
  opts: {
    pipelineVersionId: number;
    datasetId: number;
    actor: Actor;
    steps: ResolvedStep[];
    parentRunId?: number;
    rerunFromStep?: string;
    overrides?: Record<string, Record<string, unknown>>;
    /** Artifact hash of the geometry table this run uses (see snapshotGeometryTable). */
    geometryTableHash?: string | null;
  },
): number {
  return writeTransaction(db, (tx) => {
    const run = tx
      .insert(runs)
      .values({
        pipelineVersionId: opts.pipelineVersionId,
        datasetId: opts.datasetId,
        geometryTableHash: opts.geometryTableHash ?? null,
        parentRunId: opts.parentRunId ?? null,
        rerunFromStep: opts.rerunFromStep ?? null,
        overridesJson: JSON.stringify(opts.overrides ?? {}),
        startedByUserId: opts.actor.userId,
        startedByLabel: opts.actor.label,
        door: opts.actor.door,
        status: "queued",
        createdAt: new Date(),
      })
      .returning({ id: runs.id })
      .get();
    opts.steps.forEach((s, position) => {
      tx.insert(runSteps)
        .values({
          runId: run.id,
          position,
          label: s.label,
          stepId: s.stepId,
          stepVersion: getStep(s.stepId).version,
          paramsJson: canonicalJson(s.params),
        })
        .run();
    });
    recordAudit(tx, {
      actor: opts.actor,
      action: opts.parentRunId ? "run.rerun" : "run.start",
      entityType: "run",
      entityId: run.id,
      after: {
        pipelineVersionId: opts.pipelineVersionId,
        datasetId: opts.datasetId,
        parentRunId: opts.parentRunId ?? null,
        rerunFromStep: opts.rerunFromStep ?? null,
        overrides: opts.overrides ?? {},
        geometryTableHash: opts.geometryTableHash ?? null,
      },
    });
    return run.id;
  });
}

/**
 * Stores the geometry table a new run will use as an artifact and returns its hash (null when
 * the pipeline names none). A table of the same name inside the field folder wins over the path
 * the pipeline names: each folder a crew copies in (e.g. one handed to a watcher) carries its
 * own geometry. Reruns and resumes reuse the stored table, so a later edit of the file cannot
 * change what an earlier run's rerun means.
 */
export function snapshotGeometryTable(db: Db, geometryTablePath: string | null, fieldFolder: string | null): string | null {
  if (!geometryTablePath) return null;
  const local = fieldFolder ? path.join(fieldFolder, path.basename(geometryTablePath)) : "";
  const file = local && fs.existsSync(local) ? local : geometryTablePath;
  let text: string;
  try {
    text = fs.readFileSync(file, "utf8");
  } catch {
    throw new AppError("not-found", `Geometry table ${file} cannot be read (does it exist?)`, { file });
  }
  const written = writeArtifact({ kind: "text", name: path.basename(file), text });
  db.insert(artifacts)
    .values({ hash: written.hash, kind: "geometryTable", path: written.relativePath, sizeBytes: written.sizeBytes })
    .onConflictDoNothing()
    .run();
  return written.hash;
}

/** Creates a queued run of a registered pipeline version on its registered dataset. */
export function createRunFromRegistration(db: Db, reg: ReturnType<typeof registerPipelineAndDataset>, actor: Actor): number {
  return createRun(db, {
    pipelineVersionId: reg.pipelineVersionId,
    datasetId: reg.dataset.id,
    actor,
    steps: reg.resolved.steps,
    geometryTableHash: snapshotGeometryTable(db, reg.resolved.geometryTablePath, reg.dataset.folderPath || null),
  });
}

/** Creates a queued run of a pipeline file on its (or another) field folder. */
export function prepareRunFromFile(db: Db, opts: { pipelinePath: string; fieldDataOverride?: string; actor: Actor }) {
  const reg = registerPipelineAndDataset(db, opts);
  return { runId: createRunFromRegistration(db, reg, opts.actor), ...reg };
}

/**
 * Creates a queued rerun of `parentRunId`: the same pipeline version and dataset, the parent's
 * parameters, with `overrides` ({ label: { setting: value } }) applied at `fromLabel` or later.
 */
export function createRerun(
  db: Db,
  opts: { parentRunId: number; fromLabel: string; overrides: Record<string, Record<string, unknown>>; actor: Actor },
): number {
  const parent = db.select().from(runs).where(eq(runs.id, opts.parentRunId)).get();
  if (!parent) throw new AppError("not-found", `Run ${opts.parentRunId} does not exist`);
  const parentSteps = db.select().from(runSteps).where(eq(runSteps.runId, parent.id)).orderBy(runSteps.position).all();
  const labels = parentSteps.map((s) => s.label);
  const from = labels.indexOf(opts.fromLabel);
  if (from < 0) {
    throw new AppError("bad-input", `Run ${parent.id} has no step "${opts.fromLabel}"; its steps: ${labels.join(", ")}`, {
      field: "fromStep",
      choices: labels,
    });
  }
  for (const label of Object.keys(opts.overrides)) {
    const i = labels.indexOf(label);
    if (i < 0) {
      throw new AppError("bad-input", `${label}: no such step in run ${parent.id}; its steps: ${labels.join(", ")}`, {
        field: label,
        choices: labels,
      });
    }
    if (i < from) {
      throw new AppError(
        "bad-input",
        `${label}: this step comes before ${opts.fromLabel}; start the rerun from ${label} (or earlier) to change it`,
        { field: label },
      );
    }
  }
  const steps: ResolvedStep[] = parentSteps.map((s) => {
    const resolved: ResolvedStep = { label: s.label, stepId: s.stepId, version: s.stepVersion, params: JSON.parse(s.paramsJson) };
    const o = opts.overrides[s.label];
    return o ? { ...resolved, params: applyOverrides(resolved, o) } : resolved;
  });
  return createRun(db, {
    pipelineVersionId: parent.pipelineVersionId,
    datasetId: parent.datasetId,
    actor: opts.actor,
    steps,
    parentRunId: parent.id,
    rerunFromStep: opts.fromLabel,
    overrides: opts.overrides,
    geometryTableHash: parent.geometryTableHash,
  });
}

/** How often an executing run writes its heartbeat, ms. */
const HEARTBEAT_EVERY_MS = 10_000;
/** A heartbeat older than this marks a run as interrupted even if its process id is in use, ms. */
export const HEARTBEAT_STALE_MS = 10 * 60_000;

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
    writeTransaction(db, (tx) => {
      tx.update(runs)
        .set({ status: "interrupted", error: "The process running this run stopped before it finished.", finishedAt: new Date() })
        .where(and(eq(runs.id, r.id), eq(runs.status, "running")))
        .run();
      tx.update(runSteps)
        .set({ status: "cancelled", error: "interrupted" })
        .where(and(eq(runSteps.runId, r.id), eq(runSteps.status, "running")))
        .run();
    });
    marked.push(r.id);
  }
  return marked;
}

/**
 * Makes an interrupted, failed or cancelled run runnable again from its first unfinished step.
 * A run still queued (say its background process never started) needs nothing: executing it
 * claims it.
 */
export function prepareResume(db: Db, runId: number, actor: Actor): void {
  const run = db.select().from(runs).where(eq(runs.id, runId)).get();
  if (!run) throw new AppError("not-found", `Run ${runId} does not exist`);
  // A queued run needs nothing: executing it claims it (only one process can).
  if (run.status === "queued") return;
  if (!["interrupted", "failed", "cancelled"].includes(run.status)) {
    throw new AppError("conflict", `Run ${runId} is ${run.status}; only queued, interrupted, failed or cancelled runs can be resumed`);
  }
  writeTransaction(db, (tx) => {
    tx.update(runs)
      .set({ status: "queued", error: null, cancelRequested: false, finishedAt: null })
      .where(eq(runs.id, runId))
      .run();
    tx.update(runSteps)
      .set({ status: "waiting", error: null, progress: 0, progressMessage: null })
      .where(and(eq(runSteps.runId, runId), inArray(runSteps.status, ["failed", "cancelled", "running", "skipped"])))
      .run();
    recordAudit(tx, { actor, action: "run.resume", entityType: "run", entityId: runId, before: { status: run.status } });
  });
}

/** Asks a run to stop; the executing process notices at its next check. */
export function requestCancel(db: Db, runId: number, actor: Actor): void {
  const run = db.select().from(runs).where(eq(runs.id, runId)).get();
  if (!run) throw new AppError("not-found", `Run ${runId} does not exist`);
  if (!["queued", "running"].includes(run.status)) {
    throw new AppError("conflict", `Run ${runId} is already ${run.status}`);
  }
  writeTransaction(db, (tx) => {
    if (run.status === "queued") {
      tx.update(runs).set({ status: "cancelled", cancelRequested: true, finishedAt: new Date() }).where(eq(runs.id, runId)).run();
      tx.update(runSteps).set({ status: "cancelled" }).where(and(eq(runSteps.runId, runId), eq(runSteps.status, "waiting"))).run();
    } else {
      tx.update(runs).set({ cancelRequested: true }).where(eq(runs.id, runId)).run();
    }
    recordAudit(tx, { actor, action: "run.cancel", entityType: "run", entityId: runId, before: { status: run.status } });
  });
}

interface SlotEntry {
  hash: string;
  load: () => unknown;
}

function loadFieldFiles(db: Db, datasetId: number): FieldFileSet {
  const ds = getDataset(db, datasetId);
  if (!ds) throw new AppError("not-found", `Dataset ${datasetId} does not exist`);
  const files = listDatasetFiles(db, datasetId).map((f) => {
    const full = path.join(ds.folderPath, f.name);
    let bytes: Buffer;
    try {
      bytes = fs.readFileSync(full);
    } catch {
      throw new AppError("conflict", `Field file ${full} has gone since the dataset was recorded`, { file: full });
    }
    const sha = sha256Hex(bytes);
    if (sha !== f.sha256) {
      throw new AppError("conflict", `Field file ${full} changed since the dataset was recorded; start a new run to use the new content`, {
        file: full,
      });
    }
    return { name: f.name, sha256: sha, bytes: new Uint8Array(bytes.buffer, bytes.byteOffset, bytes.byteLength) };
  });
  return { kind: "field-files", files };
}

/** Executes a queued run to the end (or failure, or cancel). */
export async function executeRun(db: Db, runId: number, opts: ExecuteOptions = {}): Promise<RunOutcome> {
  const run = db.select().from(runs).where(eq(runs.id, runId)).get();
  if (!run) throw new AppError("not-found", `Run ${runId} does not exist`);
  if (run.status !== "queued") throw new AppError("conflict", `Run ${runId} is ${run.status}, not queued`);
  const pv = getPipelineVersion(db, run.pipelineVersionId);
  if (!pv) throw new AppError("not-found", `Pipeline version ${run.pipelineVersionId} does not exist`);
  const definition = JSON.parse(pv.version.definitionJson) as ResolvedPipeline;
  const steps = db.select().from(runSteps).where(eq(runSteps.runId, runId)).orderBy(runSteps.position).all();
  const events = opts.events ?? {};

  // Claim the run (another process may race us for a queued run).
  const claimed = db
    .update(runs)
    .set({ status: "running", hostPid: process.pid, heartbeatAt: new Date(), startedAt: run.startedAt ?? new Date(), error: null })
    .where(and(eq(runs.id, runId), eq(runs.status, "queued")))
    .run();
  if (claimed.changes !== 1) throw new AppError("conflict", `Run ${runId} was taken by another process`);

  const controller = new AbortController();
  // Steps hand the signal to one pool task per shot or trace block: many listeners are normal.
  setMaxListeners(0, controller.signal);
  const onOuterAbort = () => controller.abort();
  opts.signal?.addEventListener("abort", onOuterAbort);
  if (opts.signal?.aborted) controller.abort();
  // This process owns the run while it is "running" with our pid. If another door marked it
  // interrupted (say our heartbeat stalled) and someone resumed it, we stop and write nothing more.
  const owned = and(eq(runs.id, runId), eq(runs.status, "running"), eq(runs.hostPid, process.pid));
  let ownershipLost = false;
  const stillOwned = (): boolean => {
    const r = db.select({ id: runs.id }).from(runs).where(owned).get();
    if (!r) ownershipLost = true;
    return Boolean(r);
  };
  let lastHeartbeat = Date.now();
  const cancelPoll = setInterval(() => {
    try {
      const r = db.select({ c: runs.cancelRequested }).from(runs).where(eq(runs.id, runId)).get();
      if (r?.c) controller.abort();
      if (!stillOwned()) controller.abort();
      if (Date.now() - lastHeartbeat > HEARTBEAT_EVERY_MS) {
        lastHeartbeat = Date.now();
        db.update(runs).set({ heartbeatAt: new Date(lastHeartbeat) }).where(owned).run();
      }
    } catch {
      // transient lock: try again next tick
    }
  }, opts.cancelPollMs ?? 300);

  const runLog = createRunLogger(db, runId, null, { echo: (level, message) => events.onLog?.({ label: null, level, message }) });
  events.onRunStart?.({ runId, steps: steps.map((s) => ({ label: s.label, stepId: s.stepId })) });

  const slots = new Map<SlotName, SlotEntry>();
  const decoded = new Map<string, unknown>();
  const artifactSlot = (hash: string): SlotEntry => ({
    hash,
    load: () => {
      if (!decoded.has(hash)) decoded.set(hash, readArtifactSync(hash));
      return decoded.get(hash);
    },
  });

  let outcome: RunOutcome = { runId, status: "succeeded" };
  let pool = opts.pool;
  try {
    const dataset = getDataset(db, run.datasetId);
    if (definition.fieldDataPath !== null && dataset && dataset.folderPath) {
      slots.set("fieldFiles", { hash: dataset.contentHash, load: () => loadFieldFiles(db, run.datasetId) });
    }
    // Runs recorded before tables were kept (and their reruns) take the table as it is now, once.
    const tableHash = run.geometryTableHash ?? snapshotGeometryTable(db, definition.geometryTablePath, dataset?.folderPath || null);
    if (tableHash) {
      if (!run.geometryTableHash) db.update(runs).set({ geometryTableHash: tableHash }).where(eq(runs.id, runId)).run();
      slots.set("geometryTable", artifactSlot(tableHash));
    }
    runLog.info(`run ${runId} started: ${pv.pipeline.name} v${pv.version.version}, ${steps.length} steps`);

    for (const row of steps) {
      if (row.status === "succeeded") {
        for (const [slot, hash] of Object.entries(JSON.parse(row.outputsJson) as Record<string, string>)) {
          slots.set(slot as SlotName, artifactSlot(hash));
        }
        continue;
      }
      if (controller.signal.aborted) throw Object.assign(new Error("cancelled"), { name: "AbortError" });
      const step = getStep(row.stepId);
      const params = step.params.parse(JSON.parse(row.paramsJson)) as Record<string, unknown>;
      const inputs: Record<string, string> = {};
      for (const slot of step.reads) {
        const entry = slots.get(slot);
        if (!entry) {
          throw new AppError("bad-input", `Step ${row.label} needs "${slot}", which no earlier step provided`, { field: row.label });
        }
        inputs[slot] = entry.hash;
      }
      for (const slot of step.optionalReads ?? []) {
        const entry = slots.get(slot);
        if (entry) inputs[slot] = entry.hash;
      }
      const cacheKey = sha256Hex(canonicalJson({ step: step.id, version: step.version, params, inputs }));
      const started = Date.now();
      events.onStepStart?.({ position: row.position, label: row.label, stepId: row.stepId, total: steps.length });

      const cached = findCachedStep(db, cacheKey).find((c) =>
        Object.values(JSON.parse(c.outputsJson) as Record<string, string>).every((h) => hasArtifact(h)),
      );
      if (cached) {
        const sourceId = cached.cacheSourceStepId ?? cached.id;
        db.update(runSteps)
          .set({
            status: "succeeded",
            cacheHit: true,
            cacheKey,
            cacheSourceStepId: sourceId,
            stepVersion: step.version,
            paramsJson: canonicalJson(params),
            inputsJson: JSON.stringify(inputs),
            outputsJson: cached.outputsJson,
            summaryJson: cached.summaryJson,
            seriesJson: cached.seriesJson,
            progress: 1,
            startedAt: new Date(started),
            finishedAt: new Date(),
            durationMs: Date.now() - started,
          })
          .where(eq(runSteps.id, row.id))
          .run();
        for (const [slot, hash] of Object.entries(JSON.parse(cached.outputsJson) as Record<string, string>)) {
          slots.set(slot as SlotName, artifactSlot(hash));
        }
        const sourceRun = db.select({ runId: runSteps.runId }).from(runSteps).where(eq(runSteps.id, sourceId)).get();
        createRunLogger(db, runId, row.id).info(`reused the result of run ${sourceRun?.runId ?? "?"} (same step, settings and inputs)`);
        events.onStepEnd?.({ position: row.position, label: row.label, status: "succeeded", cacheHit: true, durationMs: Date.now() - started });
        continue;
      }

      db.update(runSteps)
        .set({
          status: "running",
          cacheKey,
          stepVersion: step.version,
          paramsJson: canonicalJson(params),
          inputsJson: JSON.stringify(inputs),
          startedAt: new Date(started),
          progress: 0,
        })
        .where(eq(runSteps.id, row.id))
        .run();
      const log = createRunLogger(db, runId, row.id, {
        echo: (level, message) => events.onLog?.({ label: row.label, level, message }),
      });
      let lastProgressWrite = 0;
      const recorder = createStepRecorder(db, {
        runStepId: row.id,
        cacheKey,
        label: row.label,
        existingSeriesJson: row.seriesJson,
        ensureOwned: () => {
          if (!stillOwned()) throw Object.assign(new Error("cancelled"), { name: "AbortError" });
        },
      });
      const ctx: StepContext = {
        recordIntermediate: recorder.recordIntermediate,
        extendSeries: recorder.extendSeries,
        saveCheckpoint: recorder.saveCheckpoint,
        loadCheckpoint: recorder.loadCheckpoint,
        log,
        signal: controller.signal,
        progress: (fraction, message) => {
          const f = Math.min(1, Math.max(0, Number.isFinite(fraction) ? fraction : 0));
          events.onStepProgress?.({ position: row.position, label: row.label, fraction: f, message });
          const now = Date.now();
          if (now - lastProgressWrite > 250 || f >= 1) {
            lastProgressWrite = now;
            try {
              db.update(runSteps).set({ progress: f, progressMessage: message ?? null }).where(eq(runSteps.id, row.id)).run();
            } catch {
              // progress is best effort
            }
          }
        },
        get pool() {
          pool ??= sharedWorkerPool();
          return pool;
        },
      };
      const input: Partial<SlotValues> = {};
      for (const slot of Object.keys(inputs) as SlotName[]) {
        (input as Record<string, unknown>)[slot] = slots.get(slot)!.load();
      }
      let result: StepResult;
      try {
        result = await step.run(input, params as never, ctx);
      } catch (err) {
        const e = controller.signal.aborted ? toAppError(Object.assign(new Error("cancelled"), { name: "AbortError" })) : toAppError(err);
        const status = e.code === "cancelled" ? "cancelled" : "failed";
        const message = status === "cancelled" ? "cancelled" : `${row.label}: ${e.message}`;
        if (status === "failed") log.error({ code: e.code }, e.message);
        if (!ownershipLost) recorder.flush();
        db.update(runSteps)
          .set({ status, error: message, finishedAt: new Date(), durationMs: Date.now() - started })
          .where(eq(runSteps.id, row.id))
          .run();
        events.onStepEnd?.({ position: row.position, label: row.label, status, cacheHit: false, durationMs: Date.now() - started, error: message });
        throw status === "cancelled" ? e : new AppError(e.code === "internal" ? "step-failed" : e.code, message, e.details, { cause: err });
      }
      if (!stillOwned()) throw Object.assign(new Error("cancelled"), { name: "AbortError" });
      const outputs: Record<string, string> = {};
      for (const [slot, value] of Object.entries(result.outputs)) {
        if (value === undefined) continue;
        if (!step.writes.includes(slot as SlotName)) {
          throw new AppError("internal", `Step ${step.id} wrote "${slot}", which it does not declare`);
        }
        const written = writeArtifact(value);
        db.insert(artifacts)
          .values({ hash: written.hash, kind: slot, path: written.relativePath, sizeBytes: written.sizeBytes, producedByRunStepId: row.id })
          .onConflictDoNothing()
          .run();
        outputs[slot] = written.hash;
        decoded.set(written.hash, value);
        slots.set(slot as SlotName, artifactSlot(written.hash));
      }
      const durationMs = Date.now() - started;
      db.update(runSteps)
        .set({
          status: "succeeded",
          outputsJson: JSON.stringify(outputs),
          summaryJson: result.summary ? JSON.stringify(result.summary) : null,
          seriesJson: seriesOf(recorder.mergeSeries(result.series)),
          progress: 1,
          finishedAt: new Date(),
          durationMs,
        })
        .where(eq(runSteps.id, row.id))
        .run();
      if (row.stepId === "import-records" && result.outputs.report) {
        recordRejections(db, runId, result.outputs.report.data);
      }
      log.info(`done in ${(durationMs / 1000).toFixed(2)} s`);
      events.onStepEnd?.({ position: row.position, label: row.label, status: "succeeded", cacheHit: false, durationMs });
    }
  } catch (err) {
    const e = controller.signal.aborted ? new AppError("cancelled", "The run was cancelled.") : toAppError(err);
    outcome = { runId, status: e.code === "cancelled" ? "cancelled" : "failed", error: e.message };
    if (e.code === "internal") runLog.error({ stack: (err as Error)?.stack }, e.message);
    else runLog.warn(e.message);
  } finally {
    clearInterval(cancelPoll);
    opts.signal?.removeEventListener("abort", onOuterAbort);
  }
  if (ownershipLost || !stillOwned()) {
    runLog.warn(`run ${runId} was marked interrupted or taken over by another process; this process stopped without recording more`);
    return { runId, status: "cancelled", error: "taken over by another process" };
  }
  writeTransaction(db, (tx) => {
    const done = tx
      .update(runs)
      .set({ status: outcome.status, error: outcome.error ?? null, finishedAt: new Date() })
      .where(owned)
      .run();
    if (done.changes === 0) return;
    if (outcome.status !== "succeeded") {
      tx.update(runSteps)
        .set({ status: outcome.status === "cancelled" ? "cancelled" : "skipped" })
        .where(and(eq(runSteps.runId, runId), eq(runSteps.status, "waiting")))
        .run();
    }
  });
  runLog.info(`run ${runId} ${outcome.status}`);
  return outcome;
}

function seriesOf(series: StepSeries[] | undefined): string | null {
  return series ? JSON.stringify(series) : null;
}

function recordRejections(db: Db, runId: number, data: unknown): void {
  const rejected = (data as { rejected?: Array<{ file: string; reason: string }> })?.rejected;
  if (!Array.isArray(rejected)) return;
  for (const r of rejected) {
    db.insert(rejectedFiles).values({ runId, name: r.file, reason: r.reason }).onConflictDoNothing().run();
  }
}

/** The actor for a door when no user is named: the OS user on the CLI. */
export function defaultActor(door: Door): Actor {
  const label = door === "watcher" ? "watcher" : (process.env.TRACEWRIGHT_USER ?? process.env.USER ?? "cli");
  return { userId: null, label, door };
}
