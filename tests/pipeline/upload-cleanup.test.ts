/**
 * Clean-up of transfers that never finish, with the clock moved by the test: a transfer idle for
 * longer than the limit is marked expired with an audit event and its partial files removed;
 * anything younger, finished or still in use is left alone. The limit and the hour are our own
 * contract (DEVELOPERS.md; 24 h by default, common practice for abandoned resumable uploads).
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { execa } from "execa";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../db/client";
import { listAudit } from "../../db/queries/audit";
import { ensureSurvey } from "../../db/queries/surveys";
import { addReceivedBytes, getUploadFileByTransfer } from "../../db/queries/uploads";
import { writeSeg2 } from "../../pipeline/io/seg2";
import { cleanAbandonedTransfers, staleTransferHours } from "../../pipeline/upload-cleanup";
import { admitFile, checkArrivedFile, completeUpload, openUpload, transfersDir, type UploadLimits } from "../../pipeline/uploads";
import { mulberry32 } from "../helpers/random";

const HOUR = 3_600_000;
let tmp: string;
let db: Db;
let profileId = 0;
const actor = { userId: null, label: "field crew", door: "web" as const };
const limits: UploadLimits = { maxFileBytes: 10 * 1024 * 1024, maxUploadBytes: 100 * 1024 * 1024 };

function seg2(seed: number): Uint8Array {
  const rand = mulberry32(seed);
  return writeSeg2({
    fileStrings: {},
    traces: [{ strings: { SAMPLE_INTERVAL: "0.0005" }, samples: Float32Array.from({ length: 40 }, () => rand() - 0.5) }],
  });
}

/** A transfer of `size` bytes that received `received` of them at `at`: its record and its partial files, as the tus file store leaves them. */
function partialTransfer(sessionId: number, transferId: string, name: string, size: number, received: number, at: Date) {
  admitFile(db, { sessionId, transferId, name, sizeBytes: size, limits });
  fs.mkdirSync(transfersDir(), { recursive: true });
  fs.writeFileSync(path.join(transfersDir(), transferId), new Uint8Array(received));
  fs.writeFileSync(path.join(transfersDir(), `${transferId}.json`), JSON.stringify({ id: transferId, size, offset: received }));
  if (received > 0) addReceivedBytes(db, transferId, received, at);
}

const exists = (name: string) => fs.existsSync(path.join(transfersDir(), name));

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-upload-clean-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  db = getDb();
  profileId = ensureSurvey(db, "clean-site", "L1").profile!.id;
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("the stale limit", () => {
  it("is 24 hours by default, read from TRACEWRIGHT_UPLOAD_STALE_HOURS, and a bad value is named", () => {
    expect(staleTransferHours({})).toBe(24);
    expect(staleTransferHours({ TRACEWRIGHT_UPLOAD_STALE_HOURS: "1.5" })).toBe(1.5);
    expect(() => staleTransferHours({ TRACEWRIGHT_UPLOAD_STALE_HOURS: "-2" })).toThrow(/TRACEWRIGHT_UPLOAD_STALE_HOURS must be a positive number of hours, got "-2"/);
    expect(() => staleTransferHours({ TRACEWRIGHT_UPLOAD_STALE_HOURS: "soon" })).toThrow(/TRACEWRIGHT_UPLOAD_STALE_HOURS/);
  });
});

describe("a clean-up pass", () => {
  it("expires only transfers idle past the limit, removes their partial files, audits each, and frees the name", async () => {
    const t0 = new Date();
    const s = openUpload(db, profileId, actor);
    partialTransfer(s.id, "idle", "sp01-b1.sg2", 5000, 1200, t0);
    partialTransfer(s.id, "recent", "sp01-b2.sg2", 5000, 800, new Date(t0.getTime() + 20 * HOUR));
    // Announced and never sent a byte: idle from its announcement.
    partialTransfer(s.id, "silent", "sp01-b3.sg2", 5000, 0, t0);
    // A finished file and files nothing receives into any more (one old, one new).
    admitFile(db, { sessionId: s.id, transferId: "done", name: "sp02-b1.sg2", sizeBytes: seg2(1).length, limits });
    fs.writeFileSync(path.join(transfersDir(), "done"), seg2(1));
    expect((await checkArrivedFile(db, "done", path.join(transfersDir(), "done"))).verdict).toBe("accepted");
    fs.writeFileSync(path.join(transfersDir(), "left-out"), new Uint8Array(300));
    fs.utimesSync(path.join(transfersDir(), "left-out"), new Date(t0.getTime() - 30 * HOUR), new Date(t0.getTime() - 30 * HOUR));
    fs.writeFileSync(path.join(transfersDir(), "left-out-new"), new Uint8Array(10));
    fs.utimesSync(path.join(transfersDir(), "left-out-new"), new Date(t0.getTime() + 20 * HOUR), new Date(t0.getTime() + 20 * HOUR));

    // 23 h after the idle transfer's last byte: nothing is old enough.
    const early = cleanAbandonedTransfers(db, { now: new Date(t0.getTime() + 23 * HOUR), staleHours: 24 });
    expect(early.expired).toEqual([]);
    expect(early.removedFiles).toEqual([path.join(transfersDir(), "left-out")]);
    expect(early.freedBytes).toBe(300);
    expect(exists("idle") && exists("recent") && exists("silent")).toBe(true);

    // 25 h after: the idle and the silent transfers expire; the recent one (5 h idle) stays.
    const jsonBytes = fs.statSync(path.join(transfersDir(), "idle.json")).size + fs.statSync(path.join(transfersDir(), "silent.json")).size;
    const now = new Date(t0.getTime() + 25 * HOUR);
    const late = cleanAbandonedTransfers(db, { now, staleHours: 24 });
    expect(late.expired.map((e) => [e.transferId, e.receivedBytes, e.idleHours])).toEqual([
      ["idle", 1200, 25],
      ["silent", 0, expect.closeTo(25, 0)],
    ]);
    expect(late.removedFiles.sort()).toEqual(["idle", "idle.json", "silent", "silent.json"].map((n) => path.join(transfersDir(), n)).sort());
    expect(late.freedBytes).toBe(1200 + 0 + jsonBytes);
    expect(exists("recent") && exists("recent.json") && exists("left-out-new")).toBe(true);
    const idle = getUploadFileByTransfer(db, "idle")!;
    expect(idle.verdict).toBe("expired");
    expect(idle.message).toBe("sp01-b1.sg2: expired, no byte arrived for 25 h (1.2 KiB of 4.9 KiB had arrived; limit TRACEWRIGHT_UPLOAD_STALE_HOURS=24); its partial file was removed, send it again");
    expect(getUploadFileByTransfer(db, "recent")!.verdict).toBe("receiving");
    expect(getUploadFileByTransfer(db, "done")!.verdict).toBe("accepted");

    const events = listAudit(db, { action: "upload.transfer-expired" }).filter((e) => e.entityId === String(s.id));
    expect(events).toHaveLength(2);
    const idleEvent = events.find((e) => JSON.parse(e.afterJson ?? "{}").transferId === "idle")!;
    expect(JSON.parse(idleEvent.beforeJson!)).toEqual({ file: "sp01-b1.sg2", transferId: "idle", verdict: "receiving", receivedBytes: 1200, sizeBytes: 5000 });
    expect(JSON.parse(idleEvent.afterJson!)).toMatchObject({ verdict: "expired", idleHours: 25 });
    expect(idleEvent.actorLabel).toBe("upload clean-up");

    // A second pass finds nothing more; the expired name may be sent again; expired files do not
    // stop completion (only the recent transfer, still receiving, does).
    expect(cleanAbandonedTransfers(db, { now, staleHours: 24 })).toMatchObject({ expired: [], removedFiles: [] });
    admitFile(db, { sessionId: s.id, transferId: "idle-again", name: "sp01-b1.sg2", sizeBytes: 5000, limits });
    await expect(completeUpload(db, s.id, actor)).rejects.toThrow(/2 files are still being sent/);
    const done = await completeUpload(db, s.id, actor, { leaveOutUnfinished: true });
    expect(done.files).toBe(1);
  });

  it("keeps a transfer whose bytes keep coming, however old it is", () => {
    const t0 = new Date();
    const s = openUpload(db, profileId, actor);
    partialTransfer(s.id, "slow", "sp03-b1.sg2", 9000, 100, t0);
    for (let h = 10; h <= 70; h += 10) addReceivedBytes(db, "slow", 100, new Date(t0.getTime() + h * HOUR));
    const pass = cleanAbandonedTransfers(db, { now: new Date(t0.getTime() + 80 * HOUR), staleHours: 24 });
    expect(pass.expired.map((e) => e.transferId)).not.toContain("slow");
    expect(getUploadFileByTransfer(db, "slow")!.receivedBytes).toBe(800);
    expect(exists("slow")).toBe(true);
  });
});

describe("tracewright uploads clean", () => {
  it("expires an idle transfer and prints what it did as JSON", async () => {
    const s = openUpload(db, profileId, actor);
    partialTransfer(s.id, "cli-idle", "sp04-b1.sg2", 4000, 1000, new Date(Date.now() - 2 * HOUR));
    const r = await execa(process.execPath, [path.join(process.cwd(), "bin", "tracewright.mjs"), "uploads", "clean", "--stale-hours", "1", "--json"], {
      env: { ...process.env, TRACEWRIGHT_DATA_DIR: tmp, TRACEWRIGHT_USER: "" },
      reject: false,
    });
    expect(r.stderr).toBe("");
    expect(r.exitCode).toBe(0);
    const out = JSON.parse(r.stdout);
    expect(out.staleHours).toBe(1);
    expect(out.expired).toEqual([expect.objectContaining({ sessionId: s.id, transferId: "cli-idle", name: "sp04-b1.sg2", receivedBytes: 1000, sizeBytes: 4000 })]);
    expect(exists("cli-idle")).toBe(false);
    expect(getUploadFileByTransfer(db, "cli-idle")!.verdict).toBe("expired");

    const bad = await execa(process.execPath, [path.join(process.cwd(), "bin", "tracewright.mjs"), "uploads", "clean", "--stale-hours", "0"], {
      env: { ...process.env, TRACEWRIGHT_DATA_DIR: tmp, TRACEWRIGHT_USER: "" },
      reject: false,
    });
    expect(bad.exitCode).toBe(2);
    expect(bad.stderr).toMatch(/--stale-hours must be a positive number of hours, got "0"/);
  }, 120_000);
});
