/** Pipelines and their versions: every saved change is a new version, never an overwrite. */
import { desc, eq } from "drizzle-orm";
import { writeTransaction, type Db } from "../client";
import { pipelineVersions, pipelines } from "../schema";
import { recordAudit, type Actor } from "./audit";

/** Records a pipeline definition; returns the existing version when the content is unchanged. */
export function savePipelineVersion(
  db: Db,
  p: { name: string; surveyId: number | null; sourceText: string; sourcePath: string | null; definition: unknown; contentHash: string; actor: Actor },
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
      after: { version: version.version, contentHash: version.contentHash },
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
