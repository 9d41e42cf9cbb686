/**
 * Server reads for the report page: the report's content (as the PDF shows it), the lead's
 * interpretation, the stored reports and whether the run is approved. Thin wrappers over
 * db/queries and pipeline/report.
 */
import "server-only";
import { getDb } from "@/db/client";
import { INTERPRETATION_SECTIONS, latestInterpretation } from "@/db/queries/interpretations";
import { latestDecision } from "@/db/queries/review-decisions";
import { listRunReports } from "@/db/queries/reports";
import { collectReportContent, type ReportChoices, type ReportContent } from "@/pipeline/report/content";
import { toAppError } from "@/pipeline/errors";

export interface ReportPageData {
  approved: boolean;
  /** The report as it would be made now, or why it cannot be. */
  content: ReportContent | null;
  problem: string | null;
  /** Latest text per section (empty for sections never written), with its version. */
  interpretation: Array<{ section: string; heading: string; text: string; version: number | null }>;
  reports: Array<{ hash: string; fingerprint: string; pages: number; bytes: number; generationMs: number; at: string; by: string }>;
}

/** Everything the report page shows for run `runId` with the lead's `choices`. */
export function readReportPage(runId: number, choices: ReportChoices): ReportPageData {
  const db = getDb();
  let content: ReportContent | null = null;
  let problem: string | null = null;
  try {
    content = collectReportContent(db, runId, choices);
  } catch (err) {
    problem = toAppError(err).message;
  }
  const latest = new Map(latestInterpretation(db, runId).map((r) => [r.section, r]));
  return {
    approved: latestDecision(db, runId)?.decision === "approved",
    content,
    problem,
    interpretation: INTERPRETATION_SECTIONS.map((s) => ({ section: s.id, heading: s.heading, text: latest.get(s.id)?.text ?? "", version: latest.get(s.id)?.version ?? null })),
    reports: listRunReports(db, runId)
      .reverse()
      .map((r) => ({ hash: r.hash, fingerprint: r.fingerprint, pages: r.pages, bytes: r.bytes, generationMs: r.generationMs, at: r.at.toISOString(), by: r.by })),
  };
}
