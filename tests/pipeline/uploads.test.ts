/**
 * Checks on arrival of uploaded field files, and completing an upload into a dataset.
 *
 * References: the SEG-2 layout of Pullan (1990, Geophysics 55(9), 1260–1271): trace pointers
 * from byte 32, each trace descriptor block's size X at its bytes 2–3, its data block right after
 * it; the folder content hash as DEVELOPERS.md defines it (SHA-256 over sorted "name<TAB>sha256"
 * lines), recomputed here with node:crypto; SHA-256 of the bytes from node:crypto.
 */
import crypto from "node:crypto";
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../db/client";
import { getDataset, listDatasetFiles } from "../../db/queries/datasets";
import { ensureSurvey } from "../../db/queries/surveys";
import { findProfilePipelineVersion, getUploadSession, listUploadFiles } from "../../db/queries/uploads";
import { getRun } from "../../db/queries/runs";
import { writeSeg2 } from "../../pipeline/io/seg2";
import { createRun, registerPipelineAndDataset } from "../../pipeline/run-create";
import {
  admitFile,
  checkArrivedFile,
  checkFieldFileBytes,
  completeUpload,
  openUpload,
  transfersDir,
  uploadLimits,
  UploadTooLargeError,
  type UploadLimits,
} from "../../pipeline/uploads";
import { catchError } from "../helpers/catch-error";
import { registerEngineTestSteps } from "../helpers/engine-steps";
import { mulberry32 } from "../helpers/random";

let tmp: string;
let db: Db;
const actor = { userId: null, label: "field crew", door: "web" as const };
const roomy: UploadLimits = { maxFileBytes: 10 * 1024 * 1024, maxUploadBytes: 100 * 1024 * 1024 };

/** A small SEG-2 file (little-endian, float32) with seeded random samples. */
function seg2(seed: number, traces = 3, samples = 50): Uint8Array {
  const rand = mulberry32(seed);
  return writeSeg2({
    fileStrings: { COMPANY: "Corvell" },
    traces: Array.from({ length: traces }, (_, i) => ({
      strings: { CHANNEL_NUMBER: String(i + 1), SAMPLE_INTERVAL: "0.00025", RECEIVER_LOCATION: String(i) },
      samples: Float32Array.from({ length: samples }, () => rand() - 0.5),
    })),
  });
}

const sha = (b: Uint8Array | string) => crypto.createHash("sha256").update(b).digest("hex");

let transferCount = 0;
/** Sends one file through admission and the checks on arrival, as the transfer route does. */
async function send(sessionId: number, name: string, bytes: Uint8Array, limits = roomy) {
  const transferId = `t${++transferCount}`;
  admitFile(db, { sessionId, transferId, name, sizeBytes: bytes.length, limits });
  fs.mkdirSync(transfersDir(), { recursive: true });
  const file = path.join(transfersDir(), transferId);
  fs.writeFileSync(file, bytes);
  return await checkArrivedFile(db, transferId, file);
}

let profileId = 0;

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-uploads-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  registerEngineTestSteps();
  db = getDb();
  profileId = ensureSurvey(db, "upload-site", "L1").profile!.id;
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("format told from the bytes", () => {
  it("reads SEG-2 whatever the extension, and a geometry table as text", async () => {
    const named = checkFieldFileBytes("record.bin", seg2(1));
    expect(named).toMatchObject({ ok: true, format: "seg2" });
    const csv = "file,source_point,blow,source_x_m,first_channel_x_m,channel_spacing_m,channel_count\nsp01-b1.sg2,1,1,-1,0,1,3\n";
    expect(checkFieldFileBytes("geometry.dat", new TextEncoder().encode(csv))).toMatchObject({ ok: true, format: "geometry-table" });
  });

  it("refuses a truncated SEG-2 file with the reader's message: file name and the byte offset of the cut data block", async () => {
    const good = seg2(2, 2); // two traces: the cut falls in the last trace's data block
    const view = new DataView(good.buffer, good.byteOffset, good.byteLength);
    // Pullan (1990): trace pointers from byte 32; trace descriptor block size X at bytes 2–3.
    const p2 = view.getUint32(32 + 4, true);
    const x2 = view.getUint16(p2 + 2, true);
    const cut = good.slice(0, p2 + x2 + 20); // five float32 samples into trace 2's data block
    const v = checkFieldFileBytes("sp02-b3.sg2", cut);
    expect(v.ok).toBe(false);
    if (v.ok) return;
    expect(v.byteOffset).toBe(p2 + x2);
    expect(v.message).toContain("sp02-b3.sg2");
    expect(v.message).toContain(`byte ${p2 + x2}`);
  });

  it("refuses bytes that are neither SEG-2, SEG-Y nor text, naming byte 0 and what was expected", async () => {
    const junk = new Uint8Array(4000);
    junk[0] = 0xff;
    junk[1] = 0x00;
    const v = checkFieldFileBytes("notes.xyz", junk);
    expect(v).toMatchObject({ ok: false, byteOffset: 0 });
    if (!v.ok) expect(v.message).toMatch(/notes\.xyz: byte 0: neither a SEG-2 file nor a SEG-Y file/);
  });

  it("refuses a geometry table with a bad number, naming its line", async () => {
    const csv = "file,source_point,blow,source_x_m,first_channel_x_m,channel_spacing_m,channel_count\nsp01-b1.sg2,1,1,minus one,0,1,3\n";
    const v = checkFieldFileBytes("geometry.csv", new TextEncoder().encode(csv));
    expect(v.ok).toBe(false);
    if (!v.ok) expect(v.message).toMatch(/geometry\.csv line 2/);
  });
});

describe("an upload: verdicts, duplicates, storage", () => {
  it("keeps good files, refuses the malformed one, recognises a duplicate, and stores content once", async () => {
    const s = openUpload(db, profileId, actor);
    const a = seg2(10);
    const b = seg2(11);
    const broken = seg2(12).slice(0, 200);
    expect((await send(s.id, "sp01-b1.sg2", a)).verdict).toBe("accepted");
    expect((await send(s.id, "sp01-b2.sg2", b)).verdict).toBe("accepted");
    const refused = await send(s.id, "sp01-b3.sg2", broken);
    expect(refused.verdict).toBe("refused");
    expect(refused.message).toMatch(/^sp01-b3\.sg2: byte \d+: /);
    expect(refused.byteOffset).not.toBeNull();
    const dup = await send(s.id, "sp01-b1 copy.sg2", a);
    expect(dup.verdict).toBe("duplicate");
    expect(dup.message).toContain("sp01-b1.sg2");
    expect(dup.sha256).toBe(sha(a));

    const content = path.join(tmp, "uploads", "content");
    const kept = fs.readdirSync(content, { recursive: true, withFileTypes: true }).filter((e) => e.isFile());
    expect(kept.map((e) => e.name).sort()).toEqual([sha(a), sha(b)].sort());
    // Every transfer file was moved or removed.
    expect(fs.readdirSync(transfersDir()).length).toBe(0);

    // The same content in a later upload is accepted there but not written again.
    const later = openUpload(db, profileId, actor);
    expect((await send(later.id, "sp01-b1.sg2", a)).verdict).toBe("accepted");
    expect(fs.readdirSync(content, { recursive: true, withFileTypes: true }).filter((e) => e.isFile()).length).toBe(2);
  });

  it("refuses a second file of the same name in one upload", async () => {
    const s = openUpload(db, profileId, actor);
    await send(s.id, "sp05-b1.sg2", seg2(20));
    const err = catchError<Error & { code: string }>(() => admitFile(db, { sessionId: s.id, transferId: "same-name", name: "sp05-b1.sg2", sizeBytes: 10, limits: roomy }));
    expect(err.code).toBe("conflict");
    expect(err.message).toContain("already in this upload");
  });

  it("refuses hidden, partial and folder-qualified names", async () => {
    const s = openUpload(db, profileId, actor);
    for (const name of [".hidden.sg2", "copy.sg2.part", "../escape.sg2", "a/b.sg2"]) {
      const err = catchError<Error & { code: string }>(() => admitFile(db, { sessionId: s.id, transferId: `bad-${name}`, name, sizeBytes: 10, limits: roomy }));
      expect(err.code, name).toBe("bad-input");
    }
  });
});

describe("size limits", () => {
  it("come from the settings in MiB, and a bad setting is named", async () => {
    expect(uploadLimits({})).toEqual({ maxFileBytes: 2048 * 1048576, maxUploadBytes: 16384 * 1048576 });
    expect(uploadLimits({ TRACEWRIGHT_UPLOAD_MAX_FILE_MB: "1.5", TRACEWRIGHT_UPLOAD_MAX_TOTAL_MB: "3" })).toEqual({ maxFileBytes: 1572864, maxUploadBytes: 3145728 });
    expect(() => uploadLimits({ TRACEWRIGHT_UPLOAD_MAX_FILE_MB: "lots" })).toThrow(/TRACEWRIGHT_UPLOAD_MAX_FILE_MB must be a positive number of MiB, got "lots"/);
  });

  it("refuse a file over the per-file limit and a file that would take the upload over its limit (413), before any byte is stored", async () => {
    const limits: UploadLimits = { maxFileBytes: 1000, maxUploadBytes: 2500 };
    const s = openUpload(db, profileId, actor);
    const big = catchError<UploadTooLargeError>(() => admitFile(db, { sessionId: s.id, transferId: "big", name: "big.sg2", sizeBytes: 1001, limits }));
    expect(big).toBeInstanceOf(UploadTooLargeError);
    expect(big.httpStatus).toBe(413);
    expect(big.message).toBe("big.sg2: 1001 bytes is over the limit of 1000 bytes per file (setting TRACEWRIGHT_UPLOAD_MAX_FILE_MB)");
    admitFile(db, { sessionId: s.id, transferId: "one", name: "one.sg2", sizeBytes: 1000, limits });
    admitFile(db, { sessionId: s.id, transferId: "two", name: "two.sg2", sizeBytes: 1000, limits });
    const over = catchError<UploadTooLargeError>(() => admitFile(db, { sessionId: s.id, transferId: "three", name: "three.sg2", sizeBytes: 501, limits }));
    expect(over.httpStatus).toBe(413);
    expect(over.message).toMatch(/three\.sg2: refused, the upload would hold 2\.4 KiB, over the limit of 2\.4 KiB per upload/);
    // Exactly at the limit is allowed.
    admitFile(db, { sessionId: s.id, transferId: "four", name: "four.sg2", sizeBytes: 500, limits });
    const files = listUploadFiles(db, s.id);
    expect(files.filter((f) => f.verdict === "refused").map((f) => f.name).sort()).toEqual(["big.sg2", "three.sg2"]);
  });
});

describe("completing an upload", () => {
  it("makes one dataset of the accepted files only (content hash of the folder) and queues the profile's pipeline", async () => {
    // A pipeline saved for survey upload-site, profile L2: the profile's pipeline.
    const profile2 = ensureSurvey(db, "upload-site", "L2").profile!.id;
    const file = path.join(tmp, "l2.yaml");
    fs.writeFileSync(file, "name: l2-processing\nsurvey: upload-site\nprofile: L2\nsteps:\n  - step: test-make-traces\n    settings: { traces: 3, samples: 8, value: 1 }\n");
    const earlier = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });

    const s = openUpload(db, profile2, actor);
    const a = seg2(30);
    const b = seg2(31);
    await send(s.id, "sp01-b1.sg2", a);
    await send(s.id, "sp01-b2.sg2", b);
    await send(s.id, "sp01-b3.sg2", seg2(32).slice(0, 100));
    await send(s.id, "again.sg2", a);
    // Nothing partial: a file still on its way stops completion unless left out.
    admitFile(db, { sessionId: s.id, transferId: "in-flight", name: "late.sg2", sizeBytes: 5000, limits: roomy });
    await expect(completeUpload(db, s.id, actor)).rejects.toThrow(/1 file is still being sent/);
    expect(getUploadSession(db, s.id)!.state).toBe("open");

    const done = await completeUpload(db, s.id, actor, { leaveOutUnfinished: true });
    expect(done.files).toBe(2);
    const lines = [`sp01-b1.sg2\t${sha(a)}\n`, `sp01-b2.sg2\t${sha(b)}\n`].join("");
    expect(done.contentHash).toBe(sha(lines));
    const dataset = getDataset(db, done.datasetId)!;
    expect(dataset.profileId).toBe(profile2);
    expect(listDatasetFiles(db, dataset.id).map((f) => f.name)).toEqual(["sp01-b1.sg2", "sp01-b2.sg2"]);
    expect(fs.readdirSync(dataset.folderPath).sort()).toEqual(["sp01-b1.sg2", "sp01-b2.sg2"]);
    expect(done.pipeline?.id).toBe(earlier.pipelineVersionId);
    const run = getRun(db, done.runId!)!;
    expect(run.datasetId).toBe(dataset.id);
    expect(run.status).toBe("queued");
    const session = getUploadSession(db, s.id)!;
    expect(session).toMatchObject({ state: "complete", datasetId: dataset.id, runId: done.runId });
    expect(listUploadFiles(db, s.id).find((f) => f.name === "late.sg2")?.verdict).toBe("refused");

    // Complete once only; a complete upload takes no more files.
    await expect(completeUpload(db, s.id, actor)).rejects.toThrow(/already complete/);
    expect(() => admitFile(db, { sessionId: s.id, transferId: "after", name: "after.sg2", sizeBytes: 10, limits: roomy })).toThrow(/is complete/);
  });

  it("records the dataset and queues nothing when the profile has no pipeline", async () => {
    const s = openUpload(db, profileId, actor);
    await send(s.id, "only.sg2", seg2(40));
    const done = await completeUpload(db, s.id, actor);
    expect(done.runId).toBeNull();
    expect(done.pipeline).toBeNull();
    expect(getDataset(db, done.datasetId)?.fileCount).toBe(1);
  });

  it("queues the pipeline last run on the profile, else the latest one saved naming it", async () => {
    const write = (name: string, profile: string) => {
      const file = path.join(tmp, `${name}.yaml`);
      // A field folder of the profile's own, so the run's dataset is the profile's.
      const folder = path.join(tmp, `field-${profile}`);
      fs.mkdirSync(folder, { recursive: true });
      fs.writeFileSync(path.join(folder, "sp01-b1.sg2"), seg2(50 + profile.charCodeAt(1)));
      fs.writeFileSync(file, `name: ${name}\nsurvey: upload-site\nprofile: ${profile}\nfieldData: ${folder}\nsteps:\n  - step: test-make-traces\n    settings: { traces: 2, samples: 4, value: 1 }\n`);
      return file;
    };
    const ran = createRun(db, { source: "pipeline-file", pipelinePath: write("l3-ran", "L3"), actor });
    registerPipelineAndDataset(db, { pipelinePath: write("l3-saved-later", "L3"), actor });
    const l3 = ensureSurvey(db, "upload-site", "L3").profile!.id;
    expect(findProfilePipelineVersion(db, l3)?.id).toBe(ran.pipelineVersionId);
    const saved = registerPipelineAndDataset(db, { pipelinePath: write("l4-saved", "L4"), actor });
    // Registering made a dataset of the profile but ran nothing: the saved version is the one.
    expect(findProfilePipelineVersion(db, ensureSurvey(db, "upload-site", "L4").profile!.id)?.id).toBe(saved.pipelineVersionId);
  });

  it("refuses an upload without any accepted file", async () => {
    const s = openUpload(db, profileId, actor);
    await send(s.id, "bad.sg2", seg2(41).slice(0, 40));
    await expect(completeUpload(db, s.id, actor)).rejects.toThrow(/no accepted file/);
  });
});
