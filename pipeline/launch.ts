/**
 * Starting runs from a door that must not wait for them (the control room, the watcher):
 * queue the run in SQLite, then hand it to a detached engine process that executes it with
 * the worker pool. The request that queued it returns at once.
 */
import path from "node:path";
import { spawn } from "node:child_process";
import fs from "node:fs";
import type { Db } from "../db/client";
import { dataDir, projectRoot } from "../db/paths";
import { getPipelineVersion } from "../db/queries/pipelines";
import { getDataset } from "../db/queries/datasets";
import { AppError } from "./errors";
import { createRerun, createRun, requestCancel as requestCancelRecord, snapshotGeometryTable, type Actor } from "./runner";
import type { ResolvedPipeline } from "./pipeline-file";

export type { Actor };

/** Queues a rerun (see runner.createRerun); returns its id. */
export function queueRerun(
  db: Db,
  opts: { parentRunId: number; fromLabel: string; overrides: Record<string, Record<string, unknown>>; actor: Actor },
): { runId: number } {
  return { runId: createRerun(db, opts) };
}

/** Queues a run of a recorded pipeline version on a recorded dataset. */
export function queueRun(db: Db, opts: { pipelineVersionId: number; datasetId: number; actor: Actor }): { runId: number } {
  const pv = getPipelineVersion(db, opts.pipelineVersionId);
  if (!pv) throw new AppError("not-found", `Pipeline version ${opts.pipelineVersionId} does not exist`, { field: "pipelineVersionId" });
  if (!getDataset(db, opts.datasetId)) throw new AppError("not-found", `Dataset ${opts.datasetId} does not exist`, { field: "datasetId" });
  const definition = JSON.parse(pv.version.definitionJson) as ResolvedPipeline;
  const dataset = getDataset(db, opts.datasetId)!;
  const runId = createRun(db, {
    pipelineVersionId: pv.version.id,
    datasetId: opts.datasetId,
    actor: opts.actor,
    steps: definition.steps,
    geometryTableHash: snapshotGeometryTable(db, definition.geometryTablePath, dataset.folderPath || null),
  });
  return { runId };
}

/** Asks a queued or running run to stop. */
export function requestCancel(db: Db, runId: number, actor: Actor): void {
  requestCancelRecord(db, runId, actor);
}

/**
 * Starts a detached engine process that executes queued run `runId`. Its output goes to
 * <data>/logs/run-<id>.log; its logs also go to SQLite like any run.
 */
export function launchInBackground(runId: number, onLaunchFailure?: (err: Error) => void): void {
  const logs = path.join(dataDir(), "logs");
  fs.mkdirSync(logs, { recursive: true });
  const out = fs.openSync(path.join(logs, `run-${runId}.log`), "a");
  const cli = path.join(projectRoot, "cli", "index.ts");
  const child = spawn(process.execPath, ["--import", "tsx", cli, "execute-run", String(runId)], {
    cwd: projectRoot,
    detached: true,
    stdio: ["ignore", out, out],
    env: { ...process.env, TRACEWRIGHT_DATA_DIR: dataDir() },
  });
  // A failed start must not take the server down: record it on the run instead.
  child.on("error", (err) => {
    try {
      fs.appendFileSync(path.join(logs, `run-${runId}.log`), `could not start the engine process: ${err.message}\n`);
      onLaunchFailure?.(err);
    } catch {
      // nothing more to do: the run stays queued and can be cancelled and resumed
    }
  });
  child.unref();
  fs.closeSync(out);
}
