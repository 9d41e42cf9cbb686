/** Server reads of field checks for the control room: the list per folder and one report. */
import "server-only";
import { getDb } from "@/db/client";
import { fieldCheckOfRunRow, fieldChecksOfFolder, latestFieldChecks, type FieldCheckRunRow } from "@/db/queries/field-checks";
import { hasArtifact, readArtifactSync } from "@/pipeline/artifact-store";
import type { FieldCheckReport } from "@/pipeline/steps/field-check";
import type { JsonDocument } from "@/pipeline/types";

/** A field check as pages show it. */
export interface FieldCheckListItem {
  runId: number;
  folderPath: string;
  datasetName: string;
  finishedAt: number | null;
  verdict: string;
  records: number;
  findings: number;
  recordsToReshoot: number;
  msPerRecord: number | null;
}

function item(r: FieldCheckRunRow): FieldCheckListItem {
  const s = r.summary ?? {};
  const num = (v: unknown) => (typeof v === "number" ? v : 0);
  return {
    runId: r.runId,
    folderPath: r.folderPath,
    datasetName: r.datasetName,
    finishedAt: r.finishedAt ? r.finishedAt.getTime() : null,
    verdict: typeof s.verdict === "string" ? s.verdict : "ok",
    records: num(s.records),
    findings: num(s.findings),
    recordsToReshoot: num(s.recordsToReshoot),
    msPerRecord: typeof s.msPerRecord === "number" ? s.msPerRecord : null,
  };
}

/** The latest field check of every folder. */
export function readFieldCheckList(): FieldCheckListItem[] {
  return latestFieldChecks(getDb()).map(item);
}

/** One run's field check with its report and the folder's other checks, or null. */
export function readFieldCheck(runId: number): { check: FieldCheckListItem; report: FieldCheckReport; history: FieldCheckListItem[] } | null {
  const db = getDb();
  const row = fieldCheckOfRunRow(db, runId);
  if (!row || !row.reportHash || !hasArtifact(row.reportHash)) return null;
  const doc = readArtifactSync(row.reportHash) as JsonDocument;
  if (doc.role !== "field-check") return null;
  return { check: item(row), report: doc.data as FieldCheckReport, history: fieldChecksOfFolder(db, row.folderPath).map(item) };
}
