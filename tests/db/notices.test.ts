/**
 * The mail notice outbox (db/queries/notices.ts) and its sender (pipeline/notice-sender.ts):
 * which state changes queue which notice for whom, that a person's choices and deactivation are
 * honoured, and that the sender delivers each notice once over SMTP to a real SMTP server
 * (smtp-server) and records the outcome. Our own design, described in DEVELOPERS.md; the wire
 * format is checked by the SMTP library receiving it (RFC 5321 envelope, RFC 5322 headers).
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, beforeEach, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../db/client";
import { claimNotice, listNotices, listUnsentNotices, queueUploadNotices, setWantedNoticeKinds, wantedNoticeKinds } from "../../db/queries/notices";
import { claimQueuedRun, finishOwnedRun, insertQueuedRun, markRunInterrupted } from "../../db/queries/run-records";
import { addReview } from "../../db/queries/reviews";
import { ensureDataset } from "../../db/queries/datasets";
import { savePipelineVersion } from "../../db/queries/pipelines";
import { ensureSurvey, setSurveyPerson } from "../../db/queries/surveys";
import { createUser, setUserActive, type UserRow } from "../../db/queries/users";
import { notices } from "../../db/schema";
import { NOTICE_KINDS } from "../../db/vocabulary";
import { deliverNotices } from "../../pipeline/notice-sender";
import { readable, startCatcher } from "../helpers/mail-catcher";

let tmp: string;
let db: Db;
let processor: UserRow;
let lead: UserRow;
let otherLead: UserRow;
const admin = { userId: null, label: "set-up", door: "cli" as const };

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-notices-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  delete process.env.TRACEWRIGHT_SMTP_HOST;
  process.env.TRACEWRIGHT_PUBLIC_URL = "http://control.example:3000";
  db = getDb();
  processor = createUser(db, { email: "proc@example.org", name: "Pia Processor", role: "processor", password: "pia-password-1" });
  lead = createUser(db, { email: "lead@example.org", name: "Leo Lead", role: "lead", password: "leo-password-1" });
  otherLead = createUser(db, { email: "lead2@example.org", name: "Lena Lead", role: "lead", password: "lena-password-1" });
  ensureSurvey(db, "notice-site", "N-1");
  ensureSurvey(db, "leaderless", null);
  setSurveyPerson(db, "notice-site", lead.id, "lead", admin);
  setSurveyPerson(db, "notice-site", processor.id, "processor", admin);
});

afterAll(() => {
  closeDb();
  delete process.env.TRACEWRIGHT_PUBLIC_URL;
  fs.rmSync(tmp, { recursive: true, force: true });
});

beforeEach(() => {
  db.delete(notices).run();
  setWantedNoticeKinds(db, processor.id, NOTICE_KINDS);
  setWantedNoticeKinds(db, lead.id, NOTICE_KINDS);
  setUserActive(db, processor.id, true);
});

let runCount = 0;
/** A run of `slug` started by the processor, claimed by process 4242. */
function runningRun(slug = "notice-site"): number {
  const { survey, profile } = ensureSurvey(db, slug, slug === "notice-site" ? "N-1" : null);
  const { version } = savePipelineVersion(db, {
    name: "notice-check",
    surveyId: survey.id,
    sourceText: "x",
    sourcePath: null,
    definition: { steps: [] },
    contentHash: "h",
    actor: admin,
  } as never);
  const dataset = ensureDataset(db, { folderPath: `/f/${slug}`, contentHash: `d${++runCount}`, files: [], surveyId: survey.id, profileId: profile?.id ?? null, name: "field" });
  const runId = insertQueuedRun(db, {
    pipelineVersionId: version.id,
    datasetId: dataset.id,
    actor: { userId: processor.id, label: processor.name, door: "web" },
    steps: [{ label: "a", stepId: "s", stepVersion: 1, paramsJson: "{}" }],
    parentRunId: null,
    rerunFromStep: null,
    overrides: {},
    geometryTableHash: null,
  });
  expect(claimQueuedRun(db, runId, 4242, new Date())).toBe(true);
  return runId;
}

describe("notices queued by state changes", () => {
  it("a failed run: one notice to whoever started it, with the error and the run's link", () => {
    const runId = runningRun();
    finishOwnedRun(db, runId, 4242, { status: "failed", error: "geometry: source point 7 has no blows" });
    const rows = listNotices(db);
    expect(rows).toHaveLength(1);
    expect(rows[0]).toMatchObject({ kind: "run-stopped", toUserId: processor.id, toAddress: "proc@example.org", entityType: "run", entityId: String(runId) });
    expect(rows[0].subject).toContain(`run ${runId}`);
    expect(rows[0].subject).toContain("failed");
    expect(rows[0].body).toContain("geometry: source point 7 has no blows");
    expect(rows[0].body).toContain(`http://control.example:3000/runs/${runId}`);
  });

  it("an interrupted run: the same person hears of it, with how to resume", () => {
    const runId = runningRun();
    markRunInterrupted(db, runId);
    markRunInterrupted(db, runId); // a second door noticing the same dead process queues nothing more
    const rows = listNotices(db);
    expect(rows).toHaveLength(1);
    expect(rows[0]).toMatchObject({ kind: "run-stopped", toUserId: processor.id });
    expect(rows[0].body).toContain(`tracewright resume ${runId}`);
  });

  it("a succeeded run waits for review: the survey's leads are told, not its processors nor other leads", () => {
    const runId = runningRun();
    finishOwnedRun(db, runId, 4242, { status: "succeeded" });
    const rows = listNotices(db);
    expect(rows.map((r) => [r.kind, r.toUserId])).toEqual([["review-waiting", lead.id]]);
    expect(rows[0].subject).toMatch(/waits for your review/);
  });

  it("a survey without leads: every active lead is told", () => {
    const runId = runningRun("leaderless");
    finishOwnedRun(db, runId, 4242, { status: "succeeded" });
    expect(
      listNotices(db)
        .map((r) => r.toUserId)
        .sort(),
    ).toEqual([lead.id, otherLead.id].sort());
  });

  it("a review decision goes to whoever started the run, with the comment", () => {
    const runId = runningRun();
    finishOwnedRun(db, runId, 4242, { status: "succeeded" });
    db.delete(notices).run();
    addReview(db, { runId, reviewerUserId: lead.id, decision: "returned", comment: "Mute too early at sp03." });
    const rows = listNotices(db);
    expect(rows).toHaveLength(1);
    expect(rows[0]).toMatchObject({ kind: "review-decision", toUserId: processor.id });
    expect(rows[0].subject).toContain("Leo Lead sent back");
    expect(rows[0].body).toContain("Mute too early at sp03.");
  });

  it("an upload: everyone on the survey but the uploader, with each file's verdict", () => {
    const { survey } = ensureSurvey(db, "notice-site", null);
    const rows = queueUploadNotices(db, survey.id, {
      by: processor.name,
      byUserId: processor.id,
      profileName: "N-1",
      files: [
        { name: "sp01-b1.sg2", verdict: "accepted" },
        { name: "sp01-b2.sg2", verdict: "rejected", reason: "truncated at byte 4096" },
      ],
    });
    expect(rows.map((r) => r.toUserId)).toEqual([lead.id]);
    expect(rows[0].subject).toContain("2 field files arrived");
    expect(rows[0].body).toMatch(/accepted\s+sp01-b1\.sg2/);
    expect(rows[0].body).toMatch(/rejected\s+sp01-b2\.sg2 \(truncated at byte 4096\)/);
  });

  it("honours a person's choices, and a deactivated account gets nothing", () => {
    setWantedNoticeKinds(db, processor.id, ["review-decision"]);
    expect(wantedNoticeKinds(db, processor.id)).toEqual(["review-decision"]);
    finishOwnedRun(db, runningRun(), 4242, { status: "failed", error: "x" });
    expect(listNotices(db)).toHaveLength(0);
    setWantedNoticeKinds(db, processor.id, NOTICE_KINDS);
    setUserActive(db, processor.id, false);
    finishOwnedRun(db, runningRun(), 4242, { status: "failed", error: "x" });
    expect(listNotices(db)).toHaveLength(0);
  });
});

describe("the sender", () => {
  it("without a mail server leaves notices waiting and says why", async () => {
    finishOwnedRun(db, runningRun(), 4242, { status: "failed", error: "x" });
    const r = await deliverNotices(db);
    expect(r).toMatchObject({ sent: 0, failed: 0 });
    expect(r.skipped).toMatch(/TRACEWRIGHT_SMTP_HOST/);
    expect(listUnsentNotices(db)).toHaveLength(1);
  });

  it("delivers each notice once over SMTP and marks it sent", async () => {
    const catcher = await startCatcher();
    process.env.TRACEWRIGHT_SMTP_HOST = "127.0.0.1";
    process.env.TRACEWRIGHT_SMTP_PORT = String(catcher.port);
    try {
      const failedRun = runningRun();
      finishOwnedRun(db, failedRun, 4242, { status: "failed", error: "stack: no traces left after the mute" });
      finishOwnedRun(db, runningRun(), 4242, { status: "succeeded" });
      expect(await deliverNotices(db)).toEqual({ sent: 2, failed: 0 });
      expect(await deliverNotices(db)).toEqual({ sent: 0, failed: 0 });
      expect(catcher.messages).toHaveLength(2);
      const toProcessor = catcher.messages.find((m) => m.to.includes("proc@example.org"))!;
      const text = readable(toProcessor.raw);
      expect(text).toMatch(new RegExp(`^Subject: Tracewright: run ${failedRun} of notice-check .*failed`, "m"));
      expect(text).toContain("stack: no traces left after the mute");
      expect(catcher.messages.find((m) => m.to.includes("lead@example.org"))).toBeTruthy();
      expect(listNotices(db, { state: "sent" })).toHaveLength(2);
      expect(listNotices(db, { state: "waiting" })).toHaveLength(0);
    } finally {
      delete process.env.TRACEWRIGHT_SMTP_HOST;
      delete process.env.TRACEWRIGHT_SMTP_PORT;
      await catcher.close();
    }
  });

  it("a refused delivery is recorded on the notice and retried later", async () => {
    process.env.TRACEWRIGHT_SMTP_HOST = "127.0.0.1";
    process.env.TRACEWRIGHT_SMTP_PORT = "1"; // nothing listens on port 1 here
    try {
      finishOwnedRun(db, runningRun(), 4242, { status: "failed", error: "x" });
      expect(await deliverNotices(db)).toEqual({ sent: 0, failed: 1 });
      const [n] = listNotices(db);
      expect(n.sentAt).toBeNull();
      expect(n.attempts).toBe(1);
      expect(n.error).toMatch(/refused or could not be reached/);
      expect(listUnsentNotices(db).map((u) => u.id)).toEqual([n.id]);
    } finally {
      delete process.env.TRACEWRIGHT_SMTP_HOST;
      delete process.env.TRACEWRIGHT_SMTP_PORT;
    }
  });

  it("a notice claimed by one sender is not taken by another until the claim is a minute old", () => {
    finishOwnedRun(db, runningRun(), 4242, { status: "failed", error: "x" });
    const [n] = listNotices(db);
    const t0 = new Date("2026-12-01T08:00:00Z");
    expect(claimNotice(db, n.id, t0)).toBe(true);
    expect(claimNotice(db, n.id, new Date(t0.getTime() + 59_000))).toBe(false);
    expect(claimNotice(db, n.id, new Date(t0.getTime() + 61_000))).toBe(true);
  });
});
