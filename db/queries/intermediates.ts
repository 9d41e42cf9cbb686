/**
 * What a long step records while it runs: intermediate results (one artifact each, attached to
 * the run step), checkpoints under the step's cache key, and series written live.
 */
import { and, asc, desc, eq } from "drizzle-orm";
import type { Db } from "../client";
import { runSteps, stepCheckpoints, stepIntermediates } from "../schema";

export interface IntermediateRow {
  kind: string;
  index: number;
  label: string | null;
  artifactHash: string;
  meta: Record<string, unknown> | null;
  at: Date;
  /** The run step that recorded it (the cache source for a cache hit). */
  runStepId: number;
}

/** Records (or replaces, for the same kind and index) an intermediate result of a run step. */
export function recordIntermediateRow(
  db: Db,
  e: { runStepId: number; kind: string; index: number; label?: string | null; artifactHash: string; meta?: Record<string, unknown> | null },
): void {
  const values = {
    runStepId: e.runStepId,
    kind: e.kind,
    index: e.index,
    label: e.label ?? null,
    artifactHash: e.artifactHash,
    metaJson: e.meta ? JSON.stringify(e.meta) : null,
    at: new Date(),
  };
  db.insert(stepIntermediates)
    .values(values)
    .onConflictDoUpdate({
      target: [stepIntermediates.runStepId, stepIntermediates.kind, stepIntermediates.index],
      set: { label: values.label, artifactHash: values.artifactHash, metaJson: values.metaJson, at: values.at },
    })
    .run();
}

/**
 * Intermediate results of a run step, ordered by kind and index. A cache hit has none of its
 * own: it shows those of the step that computed its outputs.
 */
export function listIntermediates(db: Db, runStepId: number): IntermediateRow[] {
  const step = db.select({ source: runSteps.cacheSourceStepId }).from(runSteps).where(eq(runSteps.id, runStepId)).get();
  const owner = step?.source ?? runStepId;
  return db
    .select()
    .from(stepIntermediates)
    .where(eq(stepIntermediates.runStepId, owner))
    .orderBy(asc(stepIntermediates.kind), asc(stepIntermediates.index))
    .all()
    .map((r) => ({
      kind: r.kind,
      index: r.index,
      label: r.label,
      artifactHash: r.artifactHash,
      meta: r.metaJson ? (JSON.parse(r.metaJson) as Record<string, unknown>) : null,
      at: r.at,
      runStepId: r.runStepId,
    }));
}

/** Intermediate results of every step of a run, by run step id. */
export function listRunIntermediates(db: Db, runId: number): Map<number, IntermediateRow[]> {
  const steps = db.select({ id: runSteps.id }).from(runSteps).where(eq(runSteps.runId, runId)).all();
  return new Map(steps.map((s) => [s.id, listIntermediates(db, s.id)]));
}

/** Saves the checkpoint of the step with this cache key, replacing the previous one. */
export function saveCheckpointRow(db: Db, cacheKey: string, artifactHash: string): void {
  db.insert(stepCheckpoints)
    .values({ cacheKey, artifactHash, at: new Date() })
    .onConflictDoUpdate({ target: stepCheckpoints.cacheKey, set: { artifactHash, at: new Date() } })
    .run();
}

/** The artifact hash of the latest checkpoint under a cache key, or null. */
export function findCheckpoint(db: Db, cacheKey: string): string | null {
  return (
    db
      .select({ hash: stepCheckpoints.artifactHash })
      .from(stepCheckpoints)
      .where(eq(stepCheckpoints.cacheKey, cacheKey))
      .orderBy(desc(stepCheckpoints.at))
      .get()?.hash ?? null
  );
}

/** Writes the series of a running step (replacing what was written before). */
export function writeStepSeries(db: Db, runStepId: number, seriesJson: string): void {
  db.update(runSteps)
    .set({ seriesJson })
    .where(and(eq(runSteps.id, runStepId), eq(runSteps.status, "running")))
    .run();
}
