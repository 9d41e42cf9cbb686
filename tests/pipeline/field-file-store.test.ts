/**
 * Uploaded field files kept in an S3-compatible object store: the upload → complete → dataset path
 * against s3rver (a local fake S3 server from the npm registry) started here on a free loopback
 * port with a temporary folder.
 *
 * References: the objects are listed and read back with the AWS SDK's own S3 client (ListObjectsV2,
 * GetObject), independently of the code under test; SHA-256 from node:crypto; the folder content
 * hash as DEVELOPERS.md defines it (SHA-256 over sorted "name<TAB>sha256" lines).
 */
import crypto from "node:crypto";
import fs from "node:fs";
import net from "node:net";
import os from "node:os";
import path from "node:path";
import { GetObjectCommand, ListObjectsV2Command, PutObjectCommand, S3Client } from "@aws-sdk/client-s3";
import { afterAll, beforeAll, beforeEach, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../db/client";
import { getDataset, listDatasetFiles } from "../../db/queries/datasets";
import { ensureSurvey } from "../../db/queries/surveys";
import { getUploadSession, listUploadFiles } from "../../db/queries/uploads";
import { writeSeg2 } from "../../pipeline/io/seg2";
import {
  contentFilePath,
  fieldFileStore,
  objectKey,
  ObjectStoreError,
  objectStoreSettings,
  s3Store,
} from "../../pipeline/field-file-store";
import { admitFile, checkArrivedFile, checkFieldFileBytes, completeUpload, openUpload, restoreUploadedDataset, transfersDir, uploadFolder, type UploadLimits } from "../../pipeline/uploads";
import { createRun } from "../../pipeline/run-create";
import { executeRun } from "../../pipeline/runner";
import { getRun } from "../../db/queries/runs";
import { startLocalS3, type LocalS3 } from "../../scripts/local-s3";
import { registerEngineTestSteps } from "../helpers/engine-steps";
import { mulberry32 } from "../helpers/random";

let tmp: string;
let db: Db;
let s3: LocalS3;
let client: S3Client;
let profileId = 0;
const actor = { userId: null, label: "field crew", door: "web" as const };
const roomy: UploadLimits = { maxFileBytes: 10 * 1024 * 1024, maxUploadBytes: 100 * 1024 * 1024 };
const sha = (b: Uint8Array | string) => crypto.createHash("sha256").update(b).digest("hex");
const savedEnv = { ...process.env };

/** A small SEG-2 file (float32) with seeded random samples. */
function seg2(seed: number, traces = 3, samples = 64): Uint8Array {
  const rand = mulberry32(seed);
  return writeSeg2({
    fileStrings: { COMPANY: "Corvell" },
    traces: Array.from({ length: traces }, (_, i) => ({
      strings: { CHANNEL_NUMBER: String(i + 1), SAMPLE_INTERVAL: "0.00025", RECEIVER_LOCATION: String(i) },
      samples: Float32Array.from({ length: samples }, () => rand() - 0.5),
    })),
  });
}

let transferCount = 0;
/** One file through admission and the checks on arrival, as the transfer route does. */
async function send(sessionId: number, name: string, bytes: Uint8Array) {
  const transferId = `s3-${++transferCount}`;
  admitFile(db, { sessionId, transferId, name, sizeBytes: bytes.length, limits: roomy });
  fs.mkdirSync(transfersDir(), { recursive: true });
  const file = path.join(transfersDir(), transferId);
  fs.writeFileSync(file, bytes);
  return checkArrivedFile(db, transferId, file);
}

/** Every object in the bucket: key → bytes, read with the SDK's own client. */
async function bucketObjects(): Promise<Map<string, Uint8Array>> {
  const listed = await client.send(new ListObjectsV2Command({ Bucket: s3.bucket }));
  const out = new Map<string, Uint8Array>();
  for (const o of listed.Contents ?? []) {
    const got = await client.send(new GetObjectCommand({ Bucket: s3.bucket, Key: o.Key! }));
    out.set(o.Key!, await got.Body!.transformToByteArray());
  }
  return out;
}

/** Sets the object-store settings of process.env (the store the upload code chooses reads them). */
function useSettings(extra: Record<string, string> = {}) {
  for (const k of Object.keys(process.env)) if (k.startsWith("TRACEWRIGHT_OBJECT_STORE_")) delete process.env[k];
  Object.assign(process.env, s3.env, extra);
}

/** A loopback port nothing listens on. */
async function closedPort(): Promise<number> {
  const srv = net.createServer();
  await new Promise<void>((resolve) => srv.listen(0, "127.0.0.1", resolve));
  const port = (srv.address() as net.AddressInfo).port;
  await new Promise<void>((resolve) => srv.close(() => resolve()));
  return port;
}

beforeAll(async () => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-objstore-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  registerEngineTestSteps();
  db = getDb();
  profileId = ensureSurvey(db, "store-site", "L1").profile!.id;
  s3 = await startLocalS3("field-files-test");
  client = new S3Client({
    endpoint: s3.url,
    region: "us-east-1",
    forcePathStyle: true,
    credentials: { accessKeyId: s3.accessKeyId, secretAccessKey: s3.secretAccessKey },
    // s3rver predates the SDK's default flexible checksums; see pipeline/field-file-store.ts.
    requestChecksumCalculation: "WHEN_REQUIRED",
    responseChecksumValidation: "WHEN_REQUIRED",
  });
}, 30_000);

afterAll(async () => {
  process.env = savedEnv;
  client?.destroy();
  closeDb();
  await s3?.stop();
  fs.rmSync(tmp, { recursive: true, force: true });
});

beforeEach(() => useSettings());

describe("object-store settings", () => {
  it("choose the data folder without a URL, and name the setting that is wrong or missing", () => {
    expect(objectStoreSettings({})).toBeNull();
    expect(fieldFileStore({}).kind).toBe("data-folder");
    expect(objectStoreSettings({ ...s3.env, TRACEWRIGHT_OBJECT_STORE_PREFIX: "crew-a" })).toMatchObject({ url: s3.url, bucket: s3.bucket, pathStyle: true, prefix: "crew-a/", attempts: 3, region: "us-east-1" });
    expect(() => objectStoreSettings({ TRACEWRIGHT_OBJECT_STORE_URL: s3.url })).toThrow(/TRACEWRIGHT_OBJECT_STORE_BUCKET must name the bucket/);
    expect(() => objectStoreSettings({ TRACEWRIGHT_OBJECT_STORE_URL: "ftp://x", TRACEWRIGHT_OBJECT_STORE_BUCKET: "b12" })).toThrow(/TRACEWRIGHT_OBJECT_STORE_URL must be an http/);
    expect(() => objectStoreSettings({ ...s3.env, TRACEWRIGHT_OBJECT_STORE_SECRET_ACCESS_KEY: "" })).toThrow(/TRACEWRIGHT_OBJECT_STORE_SECRET_ACCESS_KEY must be set with TRACEWRIGHT_OBJECT_STORE_ACCESS_KEY_ID/);
    expect(() => objectStoreSettings({ ...s3.env, TRACEWRIGHT_OBJECT_STORE_PATH_STYLE: "maybe" })).toThrow(/TRACEWRIGHT_OBJECT_STORE_PATH_STYLE must be true or false/);
    expect(fieldFileStore().kind).toBe("object-store");
  });
});

describe("an upload kept in the object store", () => {
  it("stores accepted content once under its SHA-256, never a refused file, and makes the dataset from it", async () => {
    const s = openUpload(db, profileId, actor);
    const a = seg2(1);
    const b = seg2(2);
    const broken = seg2(3).slice(0, 150);
    expect((await send(s.id, "sp01-b1.sg2", a)).verdict).toBe("accepted");
    expect((await send(s.id, "sp01-b2.sg2", b)).verdict).toBe("accepted");
    const refused = await send(s.id, "sp01-b3.sg2", broken);
    expect(refused.verdict).toBe("refused");
    expect(refused.message).toMatch(/^sp01-b3\.sg2: byte \d+: /);
    expect((await send(s.id, "sp01-b1 (copy).sg2", a)).verdict).toBe("duplicate");

    const settings = objectStoreSettings()!;
    const objects = await bucketObjects();
    // Two objects, each under the SHA-256 of its bytes; the refused file's content is not there.
    expect([...objects.keys()].sort()).toEqual([objectKey(settings, sha(a)), objectKey(settings, sha(b))].sort());
    for (const [key, bytes] of objects) expect(key.endsWith(`/${sha(bytes)}`), key).toBe(true);
    expect(Buffer.from(objects.get(objectKey(settings, sha(a)))!).equals(Buffer.from(a))).toBe(true);
    expect(objects.has(objectKey(settings, sha(broken)))).toBe(false);
    const files = listUploadFiles(db, s.id);
    expect(files.find((f) => f.name === "sp01-b1.sg2")?.storedPath).toBe(`s3://${s3.bucket}/${objectKey(settings, sha(a))}`);
    // Nothing kept in the data folder, and every transfer file is gone.
    expect(fs.existsSync(contentFilePath(sha(a)))).toBe(false);
    expect(fs.readdirSync(transfersDir())).toEqual([]);

    // The same content again is not written again.
    const again = path.join(tmp, "again.sg2");
    fs.writeFileSync(again, a);
    expect(await fieldFileStore().keep(sha(a), again)).toEqual({ location: `s3://${s3.bucket}/${objectKey(settings, sha(a))}`, written: false });
    expect(fs.existsSync(again)).toBe(false);
    expect((await bucketObjects()).size).toBe(2);

    const done = await completeUpload(db, s.id, actor);
    const dataset = getDataset(db, done.datasetId)!;
    expect(done.contentHash).toBe(sha([`sp01-b1.sg2\t${sha(a)}\n`, `sp01-b2.sg2\t${sha(b)}\n`].join("")));
    expect(listDatasetFiles(db, dataset.id).map((f) => [f.name, f.sha256])).toEqual([
      ["sp01-b1.sg2", sha(a)],
      ["sp01-b2.sg2", sha(b)],
    ]);
    // The engine reads the dataset from disk: the folder holds the bytes fetched back, and the
    // import step's reader reads them.
    for (const [name, bytes] of [["sp01-b1.sg2", a], ["sp01-b2.sg2", b]] as const) {
      const onDisk = fs.readFileSync(path.join(dataset.folderPath, name));
      expect(Buffer.from(onDisk).equals(Buffer.from(bytes)), name).toBe(true);
      expect(checkFieldFileBytes(name, onDisk)).toMatchObject({ ok: true, format: "seg2" });
    }
  });

  it("fetches content again when the data folder's copy is gone, and refuses an object changed in the store", async () => {
    const c = seg2(10);
    const first = openUpload(db, profileId, actor);
    await send(first.id, "sp02-b1.sg2", c);
    const done = await completeUpload(db, first.id, actor);
    fs.rmSync(contentFilePath(sha(c)));
    fs.rmSync(getDataset(db, done.datasetId)!.folderPath, { recursive: true });

    const second = openUpload(db, profileId, actor);
    await send(second.id, "sp02-b1.sg2", c);
    const d = seg2(11);
    await send(second.id, "sp02-b2.sg2", d);
    // Another program changes the object under d's key.
    const key = objectKey(objectStoreSettings()!, sha(d));
    await client.send(new PutObjectCommand({ Bucket: s3.bucket, Key: key, Body: Buffer.from(seg2(12)), Metadata: { sha256: sha(d) } }));
    const err = await completeUpload(db, second.id, actor).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(ObjectStoreError);
    expect((err as ObjectStoreError).message).toContain(key);
    expect((err as ObjectStoreError).message).toMatch(/has SHA-256 [0-9a-f]{12}…, not [0-9a-f]{12}… as recorded/);
    // Nothing half-made: the upload stays open, no folder, no dataset; c was fetched and checked.
    expect(getUploadSession(db, second.id)).toMatchObject({ state: "open", datasetId: null });
    expect(fs.existsSync(uploadFolder(profileId, second.id))).toBe(false);
    expect(sha(fs.readFileSync(contentFilePath(sha(c))))).toBe(sha(c));
    expect(fs.existsSync(contentFilePath(sha(d)))).toBe(false);

    // Put right, the same upload completes.
    await client.send(new PutObjectCommand({ Bucket: s3.bucket, Key: key, Body: Buffer.from(d), Metadata: { sha256: sha(d) } }));
    const ok = await completeUpload(db, second.id, actor);
    expect(ok.files).toBe(2);
  });
});

describe("the engine reading a dataset made from stored files", () => {
  it("puts back files gone from the dataset's folder, fetched from the object store, before the run reads them", async () => {
    const s = openUpload(db, profileId, actor);
    const g = seg2(40);
    const h = seg2(41);
    await send(s.id, "sp05-b1.sg2", g);
    await send(s.id, "sp05-b2.sg2", h);
    const done = await completeUpload(db, s.id, actor);
    const folder = getDataset(db, done.datasetId)!.folderPath;
    const file = path.join(tmp, "store-import.yaml");
    fs.writeFileSync(file, `name: store-import\nsurvey: store-site\nprofile: L1\nfieldData: ${folder}\nsteps:\n  - step: import-records\n`);
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    expect(getRun(db, runId)!.datasetId).toBe(done.datasetId);
    // The folder and the data folder's copies are cleared: only the object store has the bytes.
    fs.rmSync(folder, { recursive: true });
    for (const b of [g, h]) fs.rmSync(contentFilePath(sha(b)));
    const outcome = await executeRun(db, runId);
    expect(outcome).toMatchObject({ status: "succeeded" });
    for (const [name, b] of [["sp05-b1.sg2", g], ["sp05-b2.sg2", h]] as const) expect(sha(fs.readFileSync(path.join(folder, name)))).toBe(sha(b));
    // A whole folder needs nothing.
    expect(await restoreUploadedDataset(db, done.datasetId)).toEqual([]);
  });
});

describe("failures of the store", () => {
  it("a key id the store does not know: the file is refused with a message naming the credential settings and the key, nothing is kept", async () => {
    useSettings({ TRACEWRIGHT_OBJECT_STORE_ACCESS_KEY_ID: "NOT-A-KEY", TRACEWRIGHT_OBJECT_STORE_ATTEMPTS: "1" });
    const s = openUpload(db, profileId, actor);
    const e = seg2(20);
    const key = objectKey(objectStoreSettings()!, sha(e));
    const row = await send(s.id, "sp03-b1.sg2", e);
    expect(row.verdict).toBe("refused");
    expect(row.storedPath).toBeNull();
    expect(row.message).toContain("TRACEWRIGHT_OBJECT_STORE_ACCESS_KEY_ID");
    expect(row.message).toContain(key);
    expect(row.message).toMatch(/^sp03-b1\.sg2: checked and good, but not kept: Object store refused the credentials/);
    expect(fs.readdirSync(transfersDir())).toEqual([]);
    useSettings();
    expect((await bucketObjects()).has(key)).toBe(false);
    await expect(completeUpload(db, s.id, actor)).rejects.toThrow(/no accepted file/);
  });

  it("a setting left out: the file is refused with the setting's name, and the others of the upload are not disturbed", async () => {
    const s = openUpload(db, profileId, actor);
    useSettings({ TRACEWRIGHT_OBJECT_STORE_BUCKET: "" });
    const row = await send(s.id, "sp06-b1.sg2", seg2(50));
    expect(row).toMatchObject({ verdict: "refused", storedPath: null });
    expect(row.message).toBe("sp06-b1.sg2: checked and good, but not kept: TRACEWRIGHT_OBJECT_STORE_BUCKET must name the bucket when TRACEWRIGHT_OBJECT_STORE_URL is set; send it again once the store answers");
    useSettings();
    expect((await send(s.id, "sp06-b2.sg2", seg2(51))).verdict).toBe("accepted");
  });

  it("a bucket that does not exist, and an address where nothing listens, are named with their setting and the key", async () => {
    const e = seg2(21);
    const file = path.join(tmp, "e.sg2");
    fs.writeFileSync(file, e);
    const bucketErr = (await s3Store({ ...objectStoreSettings()!, bucket: "no-such-bucket" })
      .keep(sha(e), file)
      .catch((x: unknown) => x)) as ObjectStoreError;
    expect(bucketErr).toBeInstanceOf(ObjectStoreError);
    expect(bucketErr.setting).toBe("TRACEWRIGHT_OBJECT_STORE_BUCKET");
    expect(bucketErr.message).toContain("bucket no-such-bucket does not exist");
    expect(bucketErr.message).toContain(`field-files/${sha(e).slice(0, 2)}/${sha(e)}`);
    expect(bucketErr.httpStatus).toBe(503);
    expect(fs.existsSync(file)).toBe(true); // left in place when the store fails

    const port = await closedPort();
    const refused = await s3Store({ ...objectStoreSettings()!, url: `http://127.0.0.1:${port}`, attempts: 1 })
      .keep(sha(e), file)
      .catch((x: unknown) => x);
    expect(refused).toBeInstanceOf(ObjectStoreError);
    expect((refused as ObjectStoreError).setting).toBe("TRACEWRIGHT_OBJECT_STORE_URL");
    expect((refused as ObjectStoreError).message).toMatch(/Object store not reachable while looking up object field-files\/[0-9a-f]{2}\/[0-9a-f]{64} in bucket field-files-test at http:\/\/127\.0\.0\.1:\d+: .*ECONNREFUSED.*; check TRACEWRIGHT_OBJECT_STORE_URL/);
  });

  it("completion with the store refusing: a clear error, the upload open, nothing made", async () => {
    const s = openUpload(db, profileId, actor);
    const f = seg2(30);
    await send(s.id, "sp04-b1.sg2", f);
    fs.rmSync(contentFilePath(sha(f)), { force: true });
    useSettings({ TRACEWRIGHT_OBJECT_STORE_BUCKET: "moved-bucket", TRACEWRIGHT_OBJECT_STORE_ATTEMPTS: "1" });
    const wrongBucket = await completeUpload(db, s.id, actor).catch((x: unknown) => x);
    expect(wrongBucket).toBeInstanceOf(ObjectStoreError);
    expect((wrongBucket as ObjectStoreError).message).toBe(
      `s3://${s3.bucket}/field-files/${sha(f).slice(0, 2)}/${sha(f)} was kept in bucket ${s3.bucket}, but TRACEWRIGHT_OBJECT_STORE_BUCKET is moved-bucket`,
    );
    useSettings({ TRACEWRIGHT_OBJECT_STORE_ACCESS_KEY_ID: "NOT-A-KEY", TRACEWRIGHT_OBJECT_STORE_ATTEMPTS: "1" });
    const badKey = await completeUpload(db, s.id, actor).catch((x: unknown) => x);
    expect(badKey).toBeInstanceOf(ObjectStoreError);
    expect((badKey as ObjectStoreError).message).toMatch(/while fetching object field-files\/.* check TRACEWRIGHT_OBJECT_STORE_ACCESS_KEY_ID/);
    expect(getUploadSession(db, s.id)).toMatchObject({ state: "open", datasetId: null });
    expect(fs.existsSync(uploadFolder(profileId, s.id))).toBe(false);
    useSettings();
    expect((await completeUpload(db, s.id, actor)).files).toBe(1);
  });
});
