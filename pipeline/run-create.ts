/**
 * Creating runs. Every door (CLI, watcher, control room) creates a run through `createRun`,
 * saying where it comes from: a pipeline file, an already registered pipeline and dataset, a
 * recorded pipeline version on a recorded dataset, or a rerun of an earlier run. The run is
 * queued with its steps, settings and geometry table; executing it is the runner's job.
 * Resume and cancel requests are here too: they change a run's record, not its execution.
 */
import fs from "node:fs";
import path from "node:path";
import type { Db } from "../db/client";
import { registerArtifact } from "../db/queries/artifacts";
import type { Actor } from "../db/queries/audit";
import { ensureDataset, getDataset } from "../db/queries/datasets";
import { getPipelineVersion, savePipelineVersion } from "../db/queries/pipelines";
import { getRunRecord, getRunStepRecords, insertQueuedRun, recordCancelRequest, requeueRun } from "../db/queries/run-records";
import { ensureSurvey } from "../db/queries/surveys";
import type { Door } from "../db/schema";
import { canonicalJson } from "./artifact-codec";
import { writeArtifact } from "./artifact-store";
import { scanFolder } from "./dataset-folder";
import { AppError } from "./errors";
import { sha256Hex } from "./hash";
import { loadPipelineFile, type ResolvedPipeline } from "./pipeline-file";
import { getStep } from "./registry";
import { planRerun, type RecordedStep } from "./settings";

export type { Actor };

/** Hash of the pipeline definition and its text: same content, same version. */
export function pipelineContentHash(text: string, resolved: ResolvedPipeline): string {
  return sha256Hex(canonicalJson({ text, resolved }));
}

export type Registration = ReturnType<typeof registerPipelineAndDataset>;

/**
 * Records a pipeline file (a new version if changed) and the dataset of its field folder
 * (or `fieldDataOverride`), without running anything.
 */
export function registerPipelineAndDataset(db: Db, opts: { pipelinePath: string; fieldDataOverride?: string; actor: Actor }) {
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
  registerArtifact(db, { hash: written.hash, kind: "geometryTable", path: written.relativePath, sizeBytes: written.sizeBytes });
  return written.hash;
}

/** Where a new run comes from. */
export type RunRequest =
  /** A pipeline file on its field folder (or another): registered, then queued. */
  | { source: "pipeline-file"; pipelinePath: string; fieldDataOverride?: string; actor: Actor }
  /** A pipeline and dataset registered a moment ago (the watcher checks the registration first). */
  | { source: "registration"; registration: Registration; actor: Actor }
  /** A recorded pipeline version on a recorded dataset (the control room). */
  | { source: "pipeline-version"; pipelineVersionId: number; datasetId: number; actor: Actor }
  /** A rerun of an earlier run from one of its steps, with changed settings ({ label: { setting: value } }). */
  | { source: "rerun"; parentRunId: number; fromLabel: string; overrides: Record<string, Record<string, unknown>>; actor: Actor };

/** Creates a queued run with its steps (one function for every door). From a pipeline file it also says what was registered. */
export function createRun(db: Db, request: Extract<RunRequest, { source: "pipeline-file" }>): { runId: number } & Registration;
export function createRun(db: Db, request: RunRequest): { runId: number };
export function createRun(db: Db, request: RunRequest): { runId: number } {
  switch (request.source) {
    case "pipeline-file": {
      const registration = registerPipelineAndDataset(db, request);
      return { runId: createRun(db, { source: "registration", registration, actor: request.actor }).runId, ...registration };
    }
    case "registration": {
      const reg = request.registration;
      return { runId: queue(db, reg.pipelineVersionId, reg.dataset.id, reg.dataset.folderPath, reg.resolved, request.actor) };
    }
    case "pipeline-version": {
      const pv = getPipelineVersion(db, request.pipelineVersionId);
      if (!pv) throw new AppError("not-found", `Pipeline version ${request.pipelineVersionId} does not exist`, { field: "pipelineVersionId" });
      const dataset = getDataset(db, request.datasetId);
      if (!dataset) throw new AppError("not-found", `Dataset ${request.datasetId} does not exist`, { field: "datasetId" });
      const definition = JSON.parse(pv.version.definitionJson) as ResolvedPipeline;
      return { runId: queue(db, pv.version.id, dataset.id, dataset.folderPath, definition, request.actor) };
    }
    case "rerun":
      return { runId: queueRerun(db, request) };
  }
}

function recordedSteps(steps: RecordedStep[]) {
  return steps.map((s) => ({ label: s.label, stepId: s.stepId, stepVersion: getStep(s.stepId).version, paramsJson: canonicalJson(s.params) }));
}

function queue(db: Db, pipelineVersionId: number, datasetId: number, folder: string, definition: ResolvedPipeline, actor: Actor): number {
  return insertQueuedRun(db, {
    pipelineVersionId,
    datasetId,
    actor,
    steps: recordedSteps(definition.steps),
    parentRunId: null,
    rerunFromStep: null,
    overrides: {},
    geometryTableHash: snapshotGeometryTable(db, definition.geometryTablePath, folder || null),
  });
}

function queueRerun(db: Db, r: Extract<RunRequest, { source: "rerun" }>): number {
  let parent;
  try {
    parent = getRunRecord(db, r.parentRunId);
  } catch {
    throw new AppError("not-found", `Run ${r.parentRunId} does not exist`);
  }
  const parentSteps = getRunStepRecords(db, parent.id).map((s) => ({
    label: s.label,
    stepId: s.stepId,
    version: s.stepVersion,
    params: JSON.parse(s.paramsJson) as Record<string, unknown>,
  }));
  return insertQueuedRun(db, {
    pipelineVersionId: parent.pipelineVersionId,
    datasetId: parent.datasetId,
    actor: r.actor,
    steps: recordedSteps(planRerun(parent.id, parentSteps, r.fromLabel, r.overrides)),
    parentRunId: parent.id,
    rerunFromStep: r.fromLabel,
    overrides: r.overrides,
    geometryTableHash: parent.geometryTableHash,
  });
}

/**
 * Makes an interrupted, failed or cancelled run runnable again: finished steps stay as they are
 * (with their artifacts), the rest wait again; the caller then executes it with executeRun.
 * A run still queued (say its background process never started) needs nothing: executing it
 * claims it (only one process can).
 */
export function prepareResume(db: Db, runId: number, actor: Actor): void {
  const run = getRunRecord(db, runId);
  if (run.status === "queued") return;
  if (!["interrupted", "failed", "cancelled"].includes(run.status)) {
    throw new AppError("conflict", `Run ${runId} is ${run.status}; only queued, interrupted, failed or cancelled runs can be resumed`);
  }
  requeueRun(db, runId, actor, run.status);
}

/** Asks a run to stop; the executing process notices at its next check. */
export function requestCancel(db: Db, runId: number, actor: Actor): void {
  const run = getRunRecord(db, runId);
  if (!["queued", "running"].includes(run.status)) {
    throw new AppError("conflict", `Run ${runId} is already ${run.status}`);
  }
  recordCancelRequest(db, runId, actor, run.status);
}

/** The actor for a door when no user is named: the OS user on the CLI. */
export function defaultActor(door: Door): Actor {
  const label = door === "watcher" ? "watcher" : (process.env.TRACEWRIGHT_USER ?? process.env.USER ?? "cli");
  return { userId: null, label, door };
}
