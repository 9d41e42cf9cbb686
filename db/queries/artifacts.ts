/** The artifacts table: which content-addressed files exist and which run step produced them. */
import { eq } from "drizzle-orm";
import type { Db } from "../client";
import { artifacts } from "../schema";

/** Records an artifact written to the store (a second record of the same hash changes nothing). */
export function registerArtifact(
  db: Db,
  a: { hash: string; kind: string; path: string; sizeBytes: number; producedByRunStepId?: number | null },
): void {
  db.insert(artifacts)
    .values({ hash: a.hash, kind: a.kind, path: a.path, sizeBytes: a.sizeBytes, producedByRunStepId: a.producedByRunStepId ?? null })
    .onConflictDoNothing()
    .run();
}

/** Whether an artifact is recorded (the control room serves only recorded artifacts). */
export function isArtifactRecorded(db: Db, hash: string): boolean {
  return Boolean(db.select({ hash: artifacts.hash }).from(artifacts).where(eq(artifacts.hash, hash)).get());
}

/** Every recorded artifact's hash and path (relative to the data folder). */
export function listRecordedArtifacts(db: Db): Array<{ hash: string; path: string }> {
  return db.select({ hash: artifacts.hash, path: artifacts.path }).from(artifacts).all();
}

/** SQLite's own consistency check of the database file: ["ok"] when sound, else the problems found. */
export function databaseIntegrity(db: Db): string[] {
  return (db.$client.pragma("integrity_check") as Array<{ integrity_check: string }>).map((r) => r.integrity_check);
}
