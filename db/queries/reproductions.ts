/**
 * Reproductions of runs (pipeline/reproduce.ts): the request, its progress while it runs, and
 * its verdict with the comparison of every artifact. Requests and verdicts are also audit events.
 */
import { desc, eq } from "drizzle-orm";
import { writeTransaction, type Db } from "../client";
import { runReproductions } from "../schema";
import { recordAudit, type Actor } from "./audit";

export type ReproductionRecord = typeof runReproductions.$inferSelect;
export type ReproductionVerdict = Exclude<ReproductionRecord["verdict"], "running">;

/** Records a request to reproduce a run (verdict "running") and its audit event; returns its id. */
export function insertReproduction(db: Db, r: { runId: number; actor: Actor }): number {
  return writeTransaction(db, (tx) => {
    const row = tx
      .insert(runReproductions)
      .values({ runId: r.runId, requestedByUserId: r.actor.userId, requestedByLabel: r.actor.label, door: r.actor.door, startedAt: new Date() })
      .returning({ id: runReproductions.id })
      .get();
    recordAudit(tx, { actor: r.actor, action: "run.reproduce", entityType: "run", entityId: r.runId, after: { reproductionId: row.id } });
    return row.id;
  });
}

export function getReproduction(db: Db, id: number): ReproductionRecord | null {
  return db.select().from(runReproductions).where(eq(runReproductions.id, id)).get() ?? null;
}

/** The reproductions of a run, newest first. */
export function listReproductions(db: Db, runId: number): ReproductionRecord[] {
  return db.select().from(runReproductions).where(eq(runReproductions.runId, runId)).orderBy(desc(runReproductions.id)).all();
}

/** Which process works on it (so a page can tell a reproduction whose process died). */
export function claimReproduction(db: Db, id: number, pid: number): void {
  db.update(runReproductions).set({ hostPid: pid }).where(eq(runReproductions.id, id)).run();
}

export function recordReproductionProgress(db: Db, id: number, progress: number, message: string): void {
  db.update(runReproductions).set({ progress, progressMessage: message }).where(eq(runReproductions.id, id)).run();
}

/** Records the verdict with its details and the audit event saying it, in one transaction. */
export function finishReproduction(
  db: Db,
  id: number,
  r: { verdict: ReproductionVerdict; details: unknown; error?: string | null; actor: Actor; runId: number },
): void {
  writeTransaction(db, (tx) => {
    tx.update(runReproductions)
      .set({ verdict: r.verdict, detailsJson: JSON.stringify(r.details), error: r.error ?? null, progress: 1, progressMessage: null, finishedAt: new Date() })
      .where(eq(runReproductions.id, id))
      .run();
    recordAudit(tx, { actor: r.actor, action: "run.reproduce.verdict", entityType: "run", entityId: r.runId, after: { reproductionId: id, verdict: r.verdict, error: r.error ?? undefined } });
  });
}
