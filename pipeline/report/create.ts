/**
 * Making a client report: collect what it shows, write the PDF, store it as an artifact (content
 * hash) and record it (audit event "report.create" with the hash, fingerprint, pages, size and
 * generation time). One way to make a report, whichever door asks (command line or control room).
 */
import type { Db } from "../../db/client";
import { writeTransaction } from "../../db/client";
import { registerArtifact } from "../../db/queries/artifacts";
import { recordAudit, type Actor } from "../../db/queries/audit";
import type { ReportRecord } from "../../db/queries/reports";
import { readArtifactSync, writeArtifact } from "../artifact-store";
import { AppError } from "../errors";
import { collectReportContent, reportFingerprint, type ReportChoices } from "./content";
import { renderReportPdf } from "./pdf";

/** The stored form of a report: the PDF bytes with what identifies them. */
export interface StoredReport {
  kind: "report";
  format: "pdf";
  runId: number;
  fingerprint: string;
  pages: number;
  madeAt: string;
  madeBy: string;
  pdf: Uint8Array;
}

export interface CreatedReport extends ReportRecord {
  runId: number;
  pdf: Uint8Array;
}

/**
 * Makes, stores and records the client report of an approved run. `actor` is who asks (the
 * report says who made it). Throws AppError "not-found" / "conflict" / "bad-input" as
 * {@link collectReportContent} does.
 */
export async function createReport(db: Db, runId: number, actor: Actor, choices: ReportChoices = {}): Promise<CreatedReport> {
  const started = performance.now();
  const content = collectReportContent(db, runId, choices);
  const made = { at: new Date(), by: actor.label };
  const fingerprint = reportFingerprint(content, made);
  const { bytes, pages } = await renderReportPdf(content, { ...made, fingerprint });
  const stored: StoredReport = { kind: "report", format: "pdf", runId, fingerprint, pages, madeAt: made.at.toISOString(), madeBy: made.by, pdf: bytes };
  const art = writeArtifact(stored);
  const generationMs = Math.round(performance.now() - started);
  const record: ReportRecord = { hash: art.hash, fingerprint, pages, bytes: bytes.length, generationMs };
  writeTransaction(db, (tx) => {
    registerArtifact(tx, { hash: art.hash, kind: "report", path: art.relativePath, sizeBytes: art.sizeBytes });
    recordAudit(tx, {
      actor,
      action: "report.create",
      entityType: "run",
      entityId: runId,
      after: { ...record, positionsM: content.profilePositionsM, shots: content.fit.shots.map((s) => s.id), interpretationVersions: content.interpretation.map((t) => [t.section, t.version]) },
    });
  });
  return { ...record, runId, pdf: bytes };
}

/** The PDF of a stored report artifact; AppError "not-found" when the hash holds something else. */
export function readStoredReport(hash: string): StoredReport {
  const v = readArtifactSync(hash) as StoredReport;
  if (v?.kind !== "report" || !(v.pdf instanceof Uint8Array)) throw new AppError("not-found", `Artifact ${hash.slice(0, 12)} is not a report`);
  return v;
}
