/**
 * The mail notice outbox. Whoever changes a state that people want to hear about writes a row
 * here (in the same transaction as the change); a sender (pipeline/notice-sender.ts) delivers the
 * rows by SMTP and marks them sent. A person's opt-outs are honoured when the row is written, and
 * deactivated accounts get nothing.
 */
import { and, asc, desc, eq, inArray, isNull, lt, or, sql } from "drizzle-orm";
import type { Db } from "../client";
import { datasets, noticeOptOuts, notices, pipelines, pipelineVersions, profiles, runs, surveyPeople, surveys, users, type NoticeKind } from "../schema";
import { NOTICE_KINDS } from "../vocabulary";
import { surveyLeads } from "./surveys";

export type NoticeRecord = typeof notices.$inferSelect;

/** Where the control room is reached, for links in mails: TRACEWRIGHT_PUBLIC_URL, else NEXTAUTH_URL, else the demo's address. */
export function controlRoomOrigin(): string {
  return (process.env.TRACEWRIGHT_PUBLIC_URL || process.env.NEXTAUTH_URL || "http://127.0.0.1:3000").replace(/\/+$/, "");
}

/** The kinds of notice a user gets (every kind not opted out of). */
export function wantedNoticeKinds(db: Db, userId: number): NoticeKind[] {
  const out = new Set(db.select({ kind: noticeOptOuts.kind }).from(noticeOptOuts).where(eq(noticeOptOuts.userId, userId)).all().map((r) => r.kind));
  return NOTICE_KINDS.filter((k) => !out.has(k));
}

/** Sets which notices a user gets; returns the kinds before and after. */
export function setWantedNoticeKinds(db: Db, userId: number, wanted: readonly NoticeKind[]): { before: NoticeKind[]; after: NoticeKind[] } {
  const before = wantedNoticeKinds(db, userId);
  db.delete(noticeOptOuts).where(eq(noticeOptOuts.userId, userId)).run();
  const off = NOTICE_KINDS.filter((k) => !wanted.includes(k));
  if (off.length) db.insert(noticeOptOuts).values(off.map((kind) => ({ userId, kind }))).run();
  return { before, after: NOTICE_KINDS.filter((k) => wanted.includes(k)) };
}

/**
 * Queues one notice for a user, unless they opted out of its kind or are deactivated.
 * Returns the row, or null when nothing was queued.
 */
export function queueNotice(
  db: Db,
  n: { kind: NoticeKind; toUserId: number; subject: string; body: string; entityType?: string; entityId?: string | number },
): NoticeRecord | null {
  const user = db.select({ email: users.email, active: users.active }).from(users).where(eq(users.id, n.toUserId)).get();
  if (!user || !user.active) return null;
  const optedOut = db
    .select({ kind: noticeOptOuts.kind })
    .from(noticeOptOuts)
    .where(and(eq(noticeOptOuts.userId, n.toUserId), eq(noticeOptOuts.kind, n.kind)))
    .get();
  if (optedOut) return null;
  return db
    .insert(notices)
    .values({
      kind: n.kind,
      toUserId: n.toUserId,
      toAddress: user.email,
      subject: n.subject,
      body: n.body,
      entityType: n.entityType ?? "",
      entityId: n.entityId === undefined ? "" : String(n.entityId),
      createdAt: new Date(),
    })
    .returning()
    .get();
}

interface RunContext {
  id: number;
  status: string;
  error: string | null;
  startedByUserId: number | null;
  startedByLabel: string;
  pipelineName: string;
  surveyId: number | null;
  surveyName: string | null;
  profileName: string | null;
}

function runContext(db: Db, runId: number): RunContext | null {
  return (
    db
      .select({
        id: runs.id,
        status: runs.status,
        error: runs.error,
        startedByUserId: runs.startedByUserId,
        startedByLabel: runs.startedByLabel,
        pipelineName: pipelines.name,
        surveyId: surveys.id,
        surveyName: surveys.name,
        profileName: profiles.name,
      })
      .from(runs)
      .innerJoin(pipelineVersions, eq(pipelineVersions.id, runs.pipelineVersionId))
      .innerJoin(pipelines, eq(pipelines.id, pipelineVersions.pipelineId))
      .innerJoin(datasets, eq(datasets.id, runs.datasetId))
      .leftJoin(surveys, eq(surveys.id, datasets.surveyId))
      .leftJoin(profiles, eq(profiles.id, datasets.profileId))
      .where(eq(runs.id, runId))
      .get() ?? null
  );
}

function runTitle(r: RunContext): string {
  const where = [r.surveyName, r.profileName].filter(Boolean).join(", line ");
  return `run ${r.id} of ${r.pipelineName}${where ? ` (${where})` : ""}`;
}

/**
 * Notices for a run that just ended: failed or interrupted → whoever started it ("run-stopped");
 * succeeded → the leads of its survey, who should review it ("review-waiting"; when the survey
 * names no lead, every active user with the lead role). Call in the transaction that ends the run.
 */
export function queueRunEndNotices(db: Db, runId: number): NoticeRecord[] {
  const r = runContext(db, runId);
  if (!r) return [];
  const link = `${controlRoomOrigin()}/runs/${r.id}`;
  const out: Array<NoticeRecord | null> = [];
  if ((r.status === "failed" || r.status === "interrupted") && r.startedByUserId !== null) {
    const what = r.status === "failed" ? "failed" : "was interrupted";
    out.push(
      queueNotice(db, {
        kind: "run-stopped",
        toUserId: r.startedByUserId,
        subject: `Tracewright: ${runTitle(r)} ${what}`,
        body: [
          `Your ${runTitle(r)} ${what}.`,
          "",
          r.error ? `What happened: ${r.error}` : "",
          r.status === "interrupted" ? "Finished steps are kept: resume it from the run page or with `tracewright resume " + r.id + "`." : "",
          "",
          `Run page: ${link}`,
        ]
          .filter((l, i, a) => l !== "" || a[i - 1] !== "")
          .join("\n"),
        entityType: "run",
        entityId: r.id,
      }),
    );
  }
  if (r.status === "succeeded") {
    let leads = r.surveyId !== null ? surveyLeads(db, r.surveyId) : [];
    if (leads.length === 0) {
      leads = db
        .select({ userId: users.id, name: users.name, email: users.email })
        .from(users)
        .where(and(eq(users.role, "lead"), eq(users.active, true)))
        .all();
    }
    for (const lead of leads) {
      out.push(
        queueNotice(db, {
          kind: "review-waiting",
          toUserId: lead.userId,
          subject: `Tracewright: ${runTitle(r)} waits for your review`,
          body: [`${r.startedByLabel}'s ${runTitle(r)} finished and waits for a lead's review.`, "", `Review it: ${link}`].join("\n"),
          entityType: "run",
          entityId: r.id,
        }),
      );
    }
  }
  return out.filter((n): n is NoticeRecord => n !== null);
}

/** A lead's decision on a run → whoever started it ("review-decision"). Call in the transaction that records it. */
export function queueReviewDecisionNotice(db: Db, runId: number, d: { decision: "approved" | "returned"; reviewer: string; comment: string }): NoticeRecord | null {
  const r = runContext(db, runId);
  if (!r || r.startedByUserId === null) return null;
  const verb = d.decision === "approved" ? "approved" : "sent back";
  return queueNotice(db, {
    kind: "review-decision",
    toUserId: r.startedByUserId,
    subject: `Tracewright: ${d.reviewer} ${verb} ${runTitle(r)}`,
    body: [`${d.reviewer} ${verb} your ${runTitle(r)}.`, d.comment ? `\nComment: ${d.comment}` : "", "", `Run page: ${controlRoomOrigin()}/runs/${r.id}`].join("\n"),
    entityType: "run",
    entityId: r.id,
  });
}

/** What a reader said of one uploaded file. */
export interface UploadedFileVerdict {
  name: string;
  /** e.g. "accepted" or "rejected". */
  verdict: string;
  reason?: string;
}

/**
 * Field files arrived for a survey → everyone on it ("upload-arrived"), with each file's verdict.
 * `by` is who uploaded (their own copy is skipped when `byUserId` is given).
 */
export function queueUploadNotices(
  db: Db,
  surveyId: number,
  upload: { by: string; byUserId?: number | null; profileName?: string | null; files: UploadedFileVerdict[]; link?: string },
): NoticeRecord[] {
  const survey = db.select({ name: surveys.name, slug: surveys.slug }).from(surveys).where(eq(surveys.id, surveyId)).get();
  if (!survey) return [];
  const people = db
    .select({ userId: surveyPeople.userId })
    .from(surveyPeople)
    .where(eq(surveyPeople.surveyId, surveyId))
    .all();
  const lines = upload.files.map((f) => `  ${f.verdict.padEnd(9)} ${f.name}${f.reason ? ` (${f.reason})` : ""}`);
  const accepted = upload.files.filter((f) => f.verdict === "accepted").length;
  const out: NoticeRecord[] = [];
  for (const p of people) {
    if (upload.byUserId && p.userId === upload.byUserId) continue;
    const n = queueNotice(db, {
      kind: "upload-arrived",
      toUserId: p.userId,
      subject: `Tracewright: ${upload.files.length} field file${upload.files.length === 1 ? "" : "s"} arrived for ${survey.name}${upload.profileName ? `, line ${upload.profileName}` : ""}`,
      body: [
        `${upload.by} uploaded ${upload.files.length} file${upload.files.length === 1 ? "" : "s"} (${accepted} accepted):`,
        "",
        ...lines,
        "",
        `Survey page: ${upload.link ?? `${controlRoomOrigin()}/surveys/${survey.slug}`}`,
      ].join("\n"),
      entityType: "survey",
      entityId: survey.slug,
    });
    if (n) out.push(n);
  }
  return out;
}

/** Notices not sent yet (oldest first), skipping those that failed `maxAttempts` times. */
export function listUnsentNotices(db: Db, limit = 50, maxAttempts = 5): NoticeRecord[] {
  return db
    .select()
    .from(notices)
    .where(and(isNull(notices.sentAt), lt(notices.attempts, maxAttempts)))
    .orderBy(asc(notices.id))
    .limit(limit)
    .all();
}

/** How long a sender's claim on a notice holds, ms: after that another sender may take it over. */
export const NOTICE_CLAIM_MS = 60_000;

/** Takes a notice for sending; false when it was sent or another sender holds it. */
export function claimNotice(db: Db, id: number, now = new Date()): boolean {
  const r = db
    .update(notices)
    .set({ claimedAt: now })
    .where(and(eq(notices.id, id), isNull(notices.sentAt), or(isNull(notices.claimedAt), lt(notices.claimedAt, new Date(now.getTime() - NOTICE_CLAIM_MS)))))
    .run();
  return r.changes === 1;
}

/** Marks a notice delivered. */
export function markNoticeSent(db: Db, id: number, at = new Date()): void {
  db.update(notices)
    .set({ sentAt: at, error: null, attempts: sql`${notices.attempts} + 1` })
    .where(eq(notices.id, id))
    .run();
}

/** Records a failed delivery attempt. */
export function markNoticeFailed(db: Db, id: number, error: string): void {
  db.update(notices)
    .set({ error, claimedAt: null, attempts: sql`${notices.attempts} + 1` })
    .where(eq(notices.id, id))
    .run();
}

/** The outbox: newest first, optionally only sent or only waiting ones. */
export function listNotices(db: Db, f: { state?: "sent" | "waiting"; kinds?: NoticeKind[]; limit?: number } = {}): NoticeRecord[] {
  const conds = [];
  if (f.state === "sent") conds.push(sql`${notices.sentAt} is not null`);
  if (f.state === "waiting") conds.push(isNull(notices.sentAt));
  if (f.kinds?.length) conds.push(inArray(notices.kind, f.kinds));
  return db
    .select()
    .from(notices)
    .where(conds.length ? and(...conds) : undefined)
    .orderBy(desc(notices.id))
    .limit(f.limit ?? 200)
    .all();
}
