/**
 * Reads for the client report: the survey and profile of a run, and the reports made of a run
 * (each recorded as an audit event "report.create" naming the stored artifact).
 */
import { and, asc, eq } from "drizzle-orm";
import type { Db } from "../client";
import { auditEvents, datasets, profiles, runs, surveys } from "../schema";

export interface RunPlace {
  survey: { slug: string; name: string; site: string; client: string; description: string } | null;
  profile: { name: string; description: string } | null;
}

/** The survey and profile of a run's dataset (either may be missing). */
export function runPlace(db: Db, runId: number): RunPlace {
  const r = db
    .select({ survey: surveys, profile: profiles })
    .from(runs)
    .innerJoin(datasets, eq(datasets.id, runs.datasetId))
    .leftJoin(surveys, eq(surveys.id, datasets.surveyId))
    .leftJoin(profiles, eq(profiles.id, datasets.profileId))
    .where(eq(runs.id, runId))
    .get();
  return {
    survey: r?.survey ? { slug: r.survey.slug, name: r.survey.name, site: r.survey.site, client: r.survey.client, description: r.survey.description } : null,
    profile: r?.profile ? { name: r.profile.name, description: r.profile.description } : null,
  };
}

/** What the audit event of a generated report records. */
export interface ReportRecord {
  /** Artifact hash of the stored report. */
  hash: string;
  /** The report's fingerprint, printed on its last page. */
  fingerprint: string;
  pages: number;
  bytes: number;
  generationMs: number;
}

/** Reports made of a run, oldest first, with who made them and when. */
export function listRunReports(db: Db, runId: number): Array<ReportRecord & { id: number; at: Date; by: string }> {
  return db
    .select({ id: auditEvents.id, at: auditEvents.at, by: auditEvents.actorLabel, afterJson: auditEvents.afterJson })
    .from(auditEvents)
    .where(and(eq(auditEvents.action, "report.create"), eq(auditEvents.entityType, "run"), eq(auditEvents.entityId, String(runId))))
    .orderBy(asc(auditEvents.id))
    .all()
    .map((e) => ({ id: e.id, at: e.at, by: e.by, ...(JSON.parse(e.afterJson ?? "{}") as ReportRecord) }));
}
