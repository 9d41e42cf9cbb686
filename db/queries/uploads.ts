/** Uploads of field files from the browser: sessions per profile and the files sent in them. */
import { and, desc, eq, inArray, isNotNull, ne, sql } from "drizzle-orm";
import { writeTransaction, type Db } from "../client";
import { RecordError } from "../errors";
import { datasets, pipelines, pipelineVersions, profiles, runs, surveys, uploadFiles, uploadSessions } from "../schema";
import { recordAudit, type Actor } from "./audit";

export type UploadSessionRow = typeof uploadSessions.$inferSelect;
export type UploadFileRow = typeof uploadFiles.$inferSelect;
export type UploadVerdict = UploadFileRow["verdict"];

/** A profile with its survey, or null. */
export function getProfileWithSurvey(db: Db, profileId: number) {
  return (
    db
      .select({ profile: profiles, survey: surveys })
      .from(profiles)
      .innerJoin(surveys, eq(surveys.id, profiles.surveyId))
      .where(eq(profiles.id, profileId))
      .get() ?? null
  );
}

/** Every profile with its survey's slug and name, for choosing where an upload goes. */
export function listProfilesWithSurveys(db: Db) {
  return db
    .select({ profileId: profiles.id, profileName: profiles.name, surveyId: surveys.id, surveySlug: surveys.slug, surveyName: surveys.name })
    .from(profiles)
    .innerJoin(surveys, eq(surveys.id, profiles.surveyId))
    .orderBy(surveys.name, profiles.name)
    .all();
}

/** Opens an upload session on a profile (audited). */
export function insertUploadSession(db: Db, s: { surveyId: number; profileId: number; actor: Actor }): UploadSessionRow {
  return writeTransaction(db, (tx) => {
    const row = tx
      .insert(uploadSessions)
      .values({ surveyId: s.surveyId, profileId: s.profileId, createdByUserId: s.actor.userId, createdByLabel: s.actor.label, createdAt: new Date() })
      .returning()
      .get();
    recordAudit(tx, { actor: s.actor, action: "upload.open", entityType: "upload", entityId: row.id, after: { profileId: s.profileId } });
    return row;
  });
}

export function getUploadSession(db: Db, id: number): UploadSessionRow | null {
  return db.select().from(uploadSessions).where(eq(uploadSessions.id, id)).get() ?? null;
}

/** The latest sessions of a profile (newest first). */
export function listUploadSessions(db: Db, profileId: number, limit = 20): UploadSessionRow[] {
  return db.select().from(uploadSessions).where(eq(uploadSessions.profileId, profileId)).orderBy(desc(uploadSessions.id)).limit(limit).all();
}

export function listUploadFiles(db: Db, sessionId: number): UploadFileRow[] {
  return db.select().from(uploadFiles).where(eq(uploadFiles.sessionId, sessionId)).orderBy(uploadFiles.id).all();
}

export function getUploadFileByTransfer(db: Db, transferId: string): UploadFileRow | null {
  return db.select().from(uploadFiles).where(eq(uploadFiles.transferId, transferId)).get() ?? null;
}

/**
 * Records a file about to be sent, after checking in one write transaction that the session is
 * open, that no file of that name is kept or on its way in it, and that the session's total stays
 * within `maxUploadBytes` (counting every file not refused).
 *
 * @throws RecordError "conflict" (closed session, name taken) or "bad-input" (total over the limit, message given by `tooLarge`)
 */
export function insertUploadFile(
  db: Db,
  f: { sessionId: number; transferId: string; name: string; sizeBytes: number; maxUploadBytes: number; tooLarge: (totalBytes: number) => string },
): UploadFileRow {
  return writeTransaction(db, (tx) => {
    const session = tx.select().from(uploadSessions).where(eq(uploadSessions.id, f.sessionId)).get();
    if (!session) throw new RecordError("not-found", `Upload ${f.sessionId} does not exist`, "sessionId");
    if (session.state !== "open") throw new RecordError("conflict", `Upload ${f.sessionId} is ${session.state}; open a new upload to send more files`, "sessionId");
    const live = and(eq(uploadFiles.sessionId, f.sessionId), inArray(uploadFiles.verdict, ["receiving", "accepted"]));
    const taken = tx.select().from(uploadFiles).where(and(live, eq(uploadFiles.name, f.name))).get();
    if (taken) throw new RecordError("conflict", `${f.name}: a file of that name is already in this upload`, "name");
    const total = tx.select({ bytes: sql<number>`coalesce(sum(${uploadFiles.sizeBytes}), 0)` }).from(uploadFiles).where(live).get()?.bytes ?? 0;
    if (total + f.sizeBytes > f.maxUploadBytes) throw new RecordError("bad-input", f.tooLarge(total + f.sizeBytes), "size");
    return tx
      .insert(uploadFiles)
      .values({ sessionId: f.sessionId, transferId: f.transferId, name: f.name, sizeBytes: f.sizeBytes, createdAt: new Date() })
      .returning()
      .get();
  });
}

/** Records a file refused before any byte was sent (over a size limit, a bad name), so the upload's page lists it. */
export function insertRefusedUploadFile(db: Db, f: { sessionId: number; transferId: string; name: string; sizeBytes: number; message: string }): void {
  db.insert(uploadFiles)
    .values({ ...f, verdict: "refused", createdAt: new Date(), checkedAt: new Date() })
    .onConflictDoNothing()
    .run();
}

/** Adds bytes received for a transfer (every request's body counted as it arrives) and when they came. */
export function addReceivedBytes(db: Db, transferId: string, bytes: number, at: Date = new Date()): void {
  db.update(uploadFiles)
    .set({ receivedBytes: sql`${uploadFiles.receivedBytes} + ${bytes}`, lastReceivedAt: at })
    .where(eq(uploadFiles.transferId, transferId))
    .run();
}

/** Transfers still receiving whose last byte (or announcement, when none came) is older than `before`, oldest first. */
export function listIdleTransfers(db: Db, before: Date): UploadFileRow[] {
  return db
    .select()
    .from(uploadFiles)
    .where(and(eq(uploadFiles.verdict, "receiving"), sql`coalesce(${uploadFiles.lastReceivedAt}, ${uploadFiles.createdAt}) < ${before.getTime()}`))
    .orderBy(uploadFiles.id)
    .all();
}

/** Transfer ids of every file still receiving (their partial files are in use). */
export function listReceivingTransferIds(db: Db): Set<string> {
  return new Set(
    db
      .select({ transferId: uploadFiles.transferId })
      .from(uploadFiles)
      .where(eq(uploadFiles.verdict, "receiving"))
      .all()
      .map((r) => r.transferId),
  );
}

/**
 * Marks a transfer that received nothing for too long as expired, with the audit event
 * `upload.transfer-expired`, in one transaction. Does nothing (returns false) when the file is no
 * longer receiving: bytes came, or another pass expired it first.
 */
export function expireTransfer(db: Db, fileId: number, e: { actor: Actor; at: Date; idleHours: number; message: string }): boolean {
  return writeTransaction(db, (tx) => {
    const file = tx.select().from(uploadFiles).where(eq(uploadFiles.id, fileId)).get();
    if (!file || file.verdict !== "receiving") return false;
    tx.update(uploadFiles).set({ verdict: "expired", message: e.message, checkedAt: e.at }).where(eq(uploadFiles.id, fileId)).run();
    recordAudit(tx, {
      actor: e.actor,
      action: "upload.transfer-expired",
      entityType: "upload",
      entityId: file.sessionId,
      before: { file: file.name, transferId: file.transferId, verdict: "receiving", receivedBytes: file.receivedBytes, sizeBytes: file.sizeBytes },
      after: { file: file.name, transferId: file.transferId, verdict: "expired", idleHours: Math.round(e.idleHours * 10) / 10 },
    });
    return true;
  });
}

/**
 * Records the verdict of a file's checks. An accepted file whose content another file of the
 * session already has is recorded as a duplicate instead (decided inside the write transaction,
 * so two equal files arriving at once are not both kept). Returns the verdict recorded.
 */
export function recordUploadVerdict(
  db: Db,
  transferId: string,
  v: { sha256: string; format: string | null; verdict: "accepted" | "refused"; message: string; byteOffset: number | null; storedPath: string | null },
): UploadFileRow {
  return writeTransaction(db, (tx) => {
    const file = tx.select().from(uploadFiles).where(eq(uploadFiles.transferId, transferId)).get();
    if (!file) throw new RecordError("not-found", `No upload file for transfer ${transferId}`, "transferId");
    let verdict: UploadVerdict = v.verdict;
    let { message, storedPath } = v;
    if (verdict === "accepted") {
      const twin = tx
        .select()
        .from(uploadFiles)
        .where(and(eq(uploadFiles.sessionId, file.sessionId), eq(uploadFiles.sha256, v.sha256), eq(uploadFiles.verdict, "accepted"), ne(uploadFiles.id, file.id)))
        .get();
      if (twin) {
        verdict = "duplicate";
        message = `${file.name}: same content (SHA-256 ${v.sha256.slice(0, 12)}…) as ${twin.name}, already in this upload; not kept twice`;
        storedPath = null;
      }
    }
    return tx
      .update(uploadFiles)
      .set({ sha256: v.sha256, format: v.format, verdict, message, byteOffset: v.byteOffset, storedPath, checkedAt: new Date() })
      .where(eq(uploadFiles.id, file.id))
      .returning()
      .get();
  });
}

/** Marks a session complete with its dataset (audited); refuses one no longer open. */
export function markUploadComplete(db: Db, sessionId: number, r: { datasetId: number; actor: Actor; files: number }): void {
  writeTransaction(db, (tx) => {
    const s = tx.select().from(uploadSessions).where(eq(uploadSessions.id, sessionId)).get();
    if (!s) throw new RecordError("not-found", `Upload ${sessionId} does not exist`, "sessionId");
    if (s.state !== "open") throw new RecordError("conflict", `Upload ${sessionId} is already ${s.state}`, "sessionId");
    tx.update(uploadSessions).set({ state: "complete", datasetId: r.datasetId, completedAt: new Date() }).where(eq(uploadSessions.id, sessionId)).run();
    recordAudit(tx, {
      actor: r.actor,
      action: "upload.complete",
      entityType: "upload",
      entityId: sessionId,
      before: { state: "open" },
      after: { state: "complete", datasetId: r.datasetId, files: r.files },
    });
  });
}

/** Records the run queued on a completed session's dataset. */
export function recordUploadRun(db: Db, sessionId: number, runId: number): void {
  db.update(uploadSessions).set({ runId }).where(eq(uploadSessions.id, sessionId)).run();
}

/** Records every file of a session still on its way as refused, with `message` (the crew completed without it). */
export function refuseUnfinishedFiles(db: Db, sessionId: number, message: string): void {
  db.update(uploadFiles)
    .set({ verdict: "refused", message, checkedAt: new Date() })
    .where(and(eq(uploadFiles.sessionId, sessionId), eq(uploadFiles.verdict, "receiving")))
    .run();
}

/** Files of a session still on their way (not yet checked). */
export function countReceivingFiles(db: Db, sessionId: number): number {
  return db
    .select({ n: sql<number>`count(*)` })
    .from(uploadFiles)
    .where(and(eq(uploadFiles.sessionId, sessionId), inArray(uploadFiles.verdict, ["receiving"])))
    .get()!.n;
}

/**
 * The pipeline a profile's uploads are processed with: the pipeline version of the latest run on
 * a dataset of the profile (what the crew last processed it with), else the most recently saved
 * version whose pipeline belongs to the profile's survey and names the profile. Null when there is
 * none (the dataset is then recorded and nothing is queued).
 */
export function findProfilePipelineVersion(db: Db, profileId: number): { id: number; name: string; version: number } | null {
  const p = getProfileWithSurvey(db, profileId);
  if (!p) return null;
  const lastRun = db
    .select({ id: pipelineVersions.id, name: pipelines.name, version: pipelineVersions.version })
    .from(runs)
    .innerJoin(datasets, eq(datasets.id, runs.datasetId))
    .innerJoin(pipelineVersions, eq(pipelineVersions.id, runs.pipelineVersionId))
    .innerJoin(pipelines, eq(pipelines.id, pipelineVersions.pipelineId))
    .where(eq(datasets.profileId, profileId))
    .orderBy(desc(runs.id))
    .limit(1)
    .get();
  if (lastRun) return lastRun;
  const rows = db
    .select({ id: pipelineVersions.id, name: pipelines.name, version: pipelineVersions.version, definitionJson: pipelineVersions.definitionJson })
    .from(pipelineVersions)
    .innerJoin(pipelines, eq(pipelines.id, pipelineVersions.pipelineId))
    .where(eq(pipelines.surveyId, p.survey.id))
    .orderBy(desc(pipelineVersions.id))
    .all();
  for (const r of rows) {
    let profile: unknown;
    try {
      profile = (JSON.parse(r.definitionJson) as { profile?: unknown }).profile;
    } catch {
      continue;
    }
    if (profile === p.profile.name) return { id: r.id, name: r.name, version: r.version };
  }
  return null;
}

/** Where accepted content with this SHA-256 was kept (the latest upload that brought it), or null. */
export function findKeptContent(db: Db, sha256: string): string | null {
  return (
    db
      .select({ storedPath: uploadFiles.storedPath })
      .from(uploadFiles)
      .where(and(eq(uploadFiles.sha256, sha256), eq(uploadFiles.verdict, "accepted"), isNotNull(uploadFiles.storedPath)))
      .orderBy(desc(uploadFiles.id))
      .limit(1)
      .get()?.storedPath ?? null
  );
}
