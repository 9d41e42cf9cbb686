/** Field-check runs: runs with a succeeded field-check step, per folder, for the control room. */
import { and, desc, eq } from "drizzle-orm";
import type { Db } from "../client";
import { datasets, runSteps, runs } from "../schema";

export interface FieldCheckRunRow {
  runId: number;
  runStatus: string;
  datasetId: number;
  datasetName: string;
  folderPath: string;
  /** When the field-check step finished. */
  finishedAt: Date | null;
  /** Artifact hash of the step's report. */
  reportHash: string | null;
  /** The step's summary (verdict, counts, time per record). */
  summary: Record<string, unknown> | null;
}

function select(db: Db) {
  return db
    .select({
      runId: runs.id,
      runStatus: runs.status,
      datasetId: datasets.id,
      datasetName: datasets.name,
      folderPath: datasets.folderPath,
      finishedAt: runSteps.finishedAt,
      outputsJson: runSteps.outputsJson,
      summaryJson: runSteps.summaryJson,
    })
    .from(runSteps)
    .innerJoin(runs, eq(runs.id, runSteps.runId))
    .innerJoin(datasets, eq(datasets.id, runs.datasetId));
}

function toRow(r: { runId: number; runStatus: string; datasetId: number; datasetName: string; folderPath: string; finishedAt: Date | null; outputsJson: string; summaryJson: string | null }): FieldCheckRunRow {
  const outputs = JSON.parse(r.outputsJson) as Record<string, string>;
  return {
    runId: r.runId,
    runStatus: r.runStatus,
    datasetId: r.datasetId,
    datasetName: r.datasetName,
    folderPath: r.folderPath,
    finishedAt: r.finishedAt,
    reportHash: outputs.report ?? null,
    summary: r.summaryJson ? (JSON.parse(r.summaryJson) as Record<string, unknown>) : null,
  };
}

/** The latest field check of every folder, newest first. */
export function latestFieldChecks(db: Db, limit = 200): FieldCheckRunRow[] {
  const rows = select(db)
    .where(and(eq(runSteps.stepId, "field-check"), eq(runSteps.status, "succeeded")))
    .orderBy(desc(runs.id))
    .limit(limit * 5)
    .all();
  const seen = new Set<string>();
  const out: FieldCheckRunRow[] = [];
  for (const r of rows) {
    if (seen.has(r.folderPath)) continue;
    seen.add(r.folderPath);
    out.push(toRow(r));
    if (out.length >= limit) break;
  }
  return out;
}

/** The field check of one run (its last succeeded field-check step), or null. */
export function fieldCheckOfRunRow(db: Db, runId: number): FieldCheckRunRow | null {
  const r = select(db)
    .where(and(eq(runSteps.runId, runId), eq(runSteps.stepId, "field-check"), eq(runSteps.status, "succeeded")))
    .orderBy(desc(runSteps.position))
    .get();
  return r ? toRow(r) : null;
}

/** Earlier field checks of the same folder, newest first. */
export function fieldChecksOfFolder(db: Db, folderPath: string, limit = 50): FieldCheckRunRow[] {
  return select(db)
    .where(and(eq(runSteps.stepId, "field-check"), eq(runSteps.status, "succeeded"), eq(datasets.folderPath, folderPath)))
    .orderBy(desc(runs.id))
    .limit(limit)
    .all()
    .map(toRow);
}
