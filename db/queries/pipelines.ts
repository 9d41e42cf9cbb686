/** Pipelines and their versions: every saved change is a new version, never an overwrite. */
import { and, count, desc, eq, max } from "drizzle-orm";
import { writeTransaction, type Db } from "../client";
import { RecordError } from "../errors";
import { pipelineVersions, pipelines, surveys } from "../schema";
import { recordAudit, type Actor } from "./audit";

/**
 * Records a pipeline definition; returns the existing version when the content is unchanged.
 * `expectedLatestVersionId` (the editor's): refuse with RecordError("conflict") when another
 * version was saved since the one the change was made on. `changes` (one line per change, e.g.
 * "frequency-filter.highCutHz: 90 → 80") goes into the audit event.
 */
export function savePipelineVersion(
  db: Db,
  p: {
    name: string;
    surveyId: number | null;
    sourceText: string;
    sourcePath: string | null;
    definition: unknown;
    contentHash: string;
    actor: Actor;
    expectedLatestVersionId?: number;
    changes?: string[];
  },
) {
  return writeTransaction(db, (tx) => {
    let pipeline = tx.select().from(pipelines).where(eq(pipelines.name, p.name)).get();
    pipeline ??= tx.insert(pipelines).values({ name: p.name, surveyId: p.surveyId }).returning().get();
    const latest = tx
      .select()
      .from(pipelineVersions)
      .where(eq(pipelineVersions.pipelineId, pipeline.id))
      .orderBy(desc(pipelineVersions.version))
      .get();
    if (p.expectedLatestVersionId !== undefined && latest && latest.id !== p.expectedLatestVersionId) {
      throw new RecordError(
        "conflict",
        `${p.name} has a newer version (v${latest.version}, saved by ${latest.createdByLabel}) than the one these changes were made on; reload the editor and make them again`,
      );
    }
    if (latest && latest.contentHash === p.contentHash) return { pipeline, version: latest, created: false };
    const version = tx
      .insert(pipelineVersions)
      .values({
        pipelineId: pipeline.id,
        version: (latest?.version ?? 0) + 1,
        sourceText: p.sourceText,
        sourcePath: p.sourcePath,
        definitionJson: JSON.stringify(p.definition),
        contentHash: p.contentHash,
        createdByUserId: p.actor.userId,
        createdByLabel: p.actor.label,
      })
      .returning()
      .get();
    recordAudit(tx, {
      actor: p.actor,
      action: "pipeline.version",
      entityType: "pipeline",
      entityId: pipeline.name,
      before: latest ? { version: latest.version, contentHash: latest.contentHash } : undefined,
      after: { version: version.version, contentHash: version.contentHash, ...(p.changes ? { changes: p.changes } : {}) },
    });
    return { pipeline, version, created: true };
  });
}

export function getPipelineVersion(db: Db, id: number) {
  const row = db
    .select({ version: pipelineVersions, pipeline: pipelines })
    .from(pipelineVersions)
    .innerJoin(pipelines, eq(pipelines.id, pipelineVersions.pipelineId))
    .where(eq(pipelineVersions.id, id))
    .get();
  return row ?? null;
}

export function listPipelineVersions(db: Db) {
  return db
    .select({
      id: pipelineVersions.id,
      pipelineId: pipelines.id,
      name: pipelines.name,
      version: pipelineVersions.version,
      createdAt: pipelineVersions.createdAt,
      createdByLabel: pipelineVersions.createdByLabel,
      surveyId: pipelines.surveyId,
    })
    .from(pipelineVersions)
    .innerJoin(pipelines, eq(pipelines.id, pipelineVersions.pipelineId))
    .orderBy(pipelines.name, desc(pipelineVersions.version))
    .all();
}

/** Pipelines with their newest version: number, when and by whom, and how many versions. */
export function listPipelines(db: Db) {
  const stats = db
    .select({ pipelineId: pipelineVersions.pipelineId, versions: count().as("versions"), latest: max(pipelineVersions.version).as("latest") })
    .from(pipelineVersions)
    .groupBy(pipelineVersions.pipelineId)
    .as("stats");
  return db
    .select({
      id: pipelines.id,
      name: pipelines.name,
      surveySlug: surveys.slug,
      versions: stats.versions,
      latestVersion: stats.latest,
      latestAt: pipelineVersions.createdAt,
      latestBy: pipelineVersions.createdByLabel,
    })
    .from(pipelines)
    .innerJoin(stats, eq(stats.pipelineId, pipelines.id))
    .innerJoin(pipelineVersions, and(eq(pipelineVersions.pipelineId, pipelines.id), eq(pipelineVersions.version, stats.latest)))
    .leftJoin(surveys, eq(surveys.id, pipelines.surveyId))
    .orderBy(pipelines.name)
    .all();
}

/** One pipeline, or null. */
export function getPipeline(db: Db, id: number) {
  return db.select().from(pipelines).where(eq(pipelines.id, id)).get() ?? null;
}

/** The versions of one pipeline, newest first, with their text and definition. */
export function listVersionsOfPipeline(db: Db, pipelineId: number) {
  return db
    .select()
    .from(pipelineVersions)
    .where(eq(pipelineVersions.pipelineId, pipelineId))
    .orderBy(desc(pipelineVersions.version))
    .all();
}
