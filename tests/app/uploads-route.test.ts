/**
 * The upload routes: the resumable transfer (tus protocol 1.0.0, https://tus.io/protocols/resumable-upload:
 * creation with Upload-Length and Upload-Metadata, PATCH at Upload-Offset, HEAD answering the
 * offset the server holds), checks on arrival answered with the last chunk, roles (processors and
 * leads upload, auditors get 403), the origin check, size limits (413), and completion into a
 * dataset. SHA-256 from node:crypto; the SEG-2 file from the project's writer, read back by the
 * server's reader (its layout checked in tests/pipeline/io/seg2.test.ts).
 */
import crypto from "node:crypto";
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it, vi } from "vitest";
import { cookieStore, signInAs, signOut } from "./session-cookie";

vi.mock("next/headers", () => ({ cookies: async () => cookieStore, headers: async () => new Headers() }));
vi.mock("@/pipeline/launch", async (importOriginal) => {
  const actual = await importOriginal<typeof import("@/pipeline/launch")>();
  return { ...actual, launchInBackground: vi.fn() };
});

import { closeDb, getDb } from "@/db/client";
import { ROLES, type Role } from "@/db/schema";
import { seedDemoUsers } from "@/db/seed";
import { getUserByEmail } from "@/db/queries/users";
import { ensureSurvey } from "@/db/queries/surveys";
import { listUploadFiles } from "@/db/queries/uploads";
import { getDataset } from "@/db/queries/datasets";
import { writeSeg2 } from "@/pipeline/io/seg2";
import * as transferRoute from "@/app/api/uploads/[[...path]]/route";
import * as sessionsRoute from "@/app/api/upload-sessions/route";
import * as sessionRoute from "@/app/api/upload-sessions/[sessionId]/route";
import * as completeRoute from "@/app/api/upload-sessions/[sessionId]/complete/route";
import { mulberry32 } from "../helpers/random";
import { startLocalS3, type LocalS3 } from "@/scripts/local-s3";
import { GetObjectCommand, S3Client } from "@aws-sdk/client-s3";

const ORIGIN = "http://127.0.0.1:3000";
const users = {} as Record<Role, { id: number; role: Role; name: string; email: string }>;
let tmp: string;
let profileId = 0;

function seg2(seed: number, traces: number, samples: number): Uint8Array {
  const rand = mulberry32(seed);
  return writeSeg2({
    fileStrings: {},
    traces: Array.from({ length: traces }, (_, i) => ({ strings: { CHANNEL_NUMBER: String(i + 1), SAMPLE_INTERVAL: "0.0005" }, samples: Float32Array.from({ length: samples }, () => rand() - 0.5) })),
  });
}

const b64 = (s: string) => Buffer.from(s, "utf8").toString("base64");
const tus = { "tus-resumable": "1.0.0", origin: ORIGIN, host: "127.0.0.1:3000" };

async function openSession(): Promise<number> {
  const res = await sessionsRoute.POST(new Request(`${ORIGIN}/api/upload-sessions`, { method: "POST", headers: { origin: ORIGIN, "content-type": "application/json" }, body: JSON.stringify({ profileId }) }));
  expect(res.status, await res.clone().text()).toBe(201);
  return ((await res.json()) as { sessionId: number }).sessionId;
}

function announce(sessionId: number, name: string, size: number, headers: Record<string, string> = {}) {
  return transferRoute.POST(
    new Request(`${ORIGIN}/api/uploads`, {
      method: "POST",
      headers: { ...tus, "upload-length": String(size), "upload-metadata": `sessionId ${b64(String(sessionId))},filename ${b64(name)}`, ...headers },
    }),
  );
}

function patch(location: string, offset: number, data: Uint8Array | ReadableStream<Uint8Array>, headers: Record<string, string> = {}) {
  const body = data instanceof Uint8Array ? new Uint8Array(data) : data;
  return transferRoute.PATCH(
    new Request(`${ORIGIN}${location}`, {
      method: "PATCH",
      headers: { ...tus, "upload-offset": String(offset), "content-type": "application/offset+octet-stream", ...headers },
      body,
      duplex: "half",
    } as RequestInit),
  );
}

const head = (location: string) => transferRoute.HEAD(new Request(`${ORIGIN}${location}`, { method: "HEAD", headers: tus }));

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-upload-route-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  process.env.NEXTAUTH_SECRET = "upload-route-test-secret-0123456789abcdef";
  process.env.NEXTAUTH_URL = ORIGIN;
  const db = getDb();
  for (const a of seedDemoUsers(db)) {
    const u = getUserByEmail(db, a.email)!;
    users[u.role] = { id: u.id, role: u.role, name: u.name, email: u.email };
  }
  profileId = ensureSurvey(db, "route-site", "R1").profile!.id;
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
  delete process.env.TRACEWRIGHT_UPLOAD_MAX_FILE_MB;
});

describe("a transfer interrupted half-way resumes from the server's offset", () => {
  it("sends no byte twice and answers the verdict with the last chunk", async () => {
    await signInAs(users.processor);
    const sessionId = await openSession();
    const bytes = seg2(7, 24, 2000); // about 190 kB
    const created = await announce(sessionId, "sp07-b1.sg2", bytes.length);
    expect(created.status, await created.clone().text()).toBe(201);
    const location = created.headers.get("location")!;
    expect(location).toMatch(/^\/api\/uploads\/[0-9a-f]+$/);

    // First chunk: 64 kB, acknowledged.
    const first = await patch(location, 0, bytes.slice(0, 65536));
    expect(first.status).toBe(204);
    expect(first.headers.get("upload-offset")).toBe("65536");

    // Second chunk: the connection drops after 40 000 more bytes arrived.
    const cut = 40000;
    const dropping = new ReadableStream<Uint8Array>({
      start(controller) {
        controller.enqueue(bytes.slice(65536, 65536 + cut));
      },
      async pull(controller) {
        await new Promise((r) => setTimeout(r, 300));
        controller.error(new Error("connection reset by the field modem"));
      },
    });
    const broken = await patch(location, 65536, dropping);
    expect(broken.status).toBeGreaterThanOrEqual(400);

    // The client asks where to go on from: the bytes that arrived are kept.
    const asked = await head(location);
    expect(asked.status).toBe(200);
    const offset = Number(asked.headers.get("upload-offset"));
    expect(offset).toBe(65536 + cut);
    expect(asked.headers.get("upload-length")).toBe(String(bytes.length));

    // Sending from a stale offset is refused (tus: 409), nothing written.
    expect((await patch(location, 65536, bytes.slice(65536))).status).toBe(409);

    const last = await patch(location, offset, bytes.slice(offset));
    expect(last.status).toBe(200);
    const verdict = (await last.json()) as { verdict: string; format: string };
    expect(verdict).toMatchObject({ verdict: "accepted", format: "seg2" });

    const [file] = listUploadFiles(getDb(), sessionId);
    expect(file.sha256).toBe(crypto.createHash("sha256").update(bytes).digest("hex"));
    expect(file.receivedBytes).toBe(bytes.length);
  });
});

describe("checks on arrival through the route", () => {
  it("answers a malformed file's refusal with the reader's byte offset, and a duplicate", async () => {
    await signInAs(users.lead);
    const sessionId = await openSession();
    const good = seg2(8, 4, 100);
    const bad = good.slice(0, good.length - 7);
    const send = async (name: string, bytes: Uint8Array) => {
      const c = await announce(sessionId, name, bytes.length);
      expect(c.status).toBe(201);
      const r = await patch(c.headers.get("location")!, 0, bytes);
      expect(r.status).toBe(200);
      return (await r.json()) as { verdict: string; message: string; byteOffset: number | null };
    };
    expect((await send("sp08-b1.sg2", good)).verdict).toBe("accepted");
    const refused = await send("sp08-b2.sg2", bad);
    expect(refused.verdict).toBe("refused");
    expect(refused.byteOffset).toBeGreaterThan(0);
    expect(refused.message).toContain(`sp08-b2.sg2: byte ${refused.byteOffset}:`);
    const dup = await send("sp08-b1 (2).sg2", good);
    expect(dup.verdict).toBe("duplicate");

    const view = await sessionRoute.GET(new Request(`${ORIGIN}/api/upload-sessions/${sessionId}`), { params: Promise.resolve({ sessionId: String(sessionId) }) });
    const body = (await view.json()) as { files: Array<{ name: string; verdict: string }> };
    expect(body.files.map((f) => [f.name, f.verdict])).toEqual([
      ["sp08-b1.sg2", "accepted"],
      ["sp08-b2.sg2", "refused"],
      ["sp08-b1 (2).sg2", "duplicate"],
    ]);

    const done = await completeRoute.POST(
      new Request(`${ORIGIN}/api/upload-sessions/${sessionId}/complete`, { method: "POST", headers: { origin: ORIGIN, "content-type": "application/json" }, body: "{}" }),
      { params: Promise.resolve({ sessionId: String(sessionId) }) },
    );
    expect(done.status, await done.clone().text()).toBe(200);
    const made = (await done.json()) as { datasetId: number; files: number; runId: number | null };
    expect(made.files).toBe(1);
    expect(getDataset(getDb(), made.datasetId)?.fileCount).toBe(1);
  });

  it("refuses a file over the per-file limit with 413 and the setting's name, before any byte is sent", async () => {
    await signInAs(users.processor);
    const sessionId = await openSession();
    const transfers = () => fs.readdirSync(path.join(tmp, "uploads", "transfers")).length;
    const before = transfers();
    process.env.TRACEWRIGHT_UPLOAD_MAX_FILE_MB = "0.001"; // 1048 bytes
    try {
      const res = await announce(sessionId, "huge.sg2", 5000);
      expect(res.status).toBe(413);
      expect(await res.text()).toBe("huge.sg2: 4.9 KiB is over the limit of 1.0 KiB per file (setting TRACEWRIGHT_UPLOAD_MAX_FILE_MB)");
    } finally {
      delete process.env.TRACEWRIGHT_UPLOAD_MAX_FILE_MB;
    }
    expect(transfers()).toBe(before);
    expect(listUploadFiles(getDb(), sessionId).map((f) => [f.name, f.verdict])).toEqual([["huge.sg2", "refused"]]);
  });
});

describe("who may upload", () => {
  it("auditors get 403 on every upload route, nobody signed in 401; processors and leads may", async () => {
    await signInAs(users.processor);
    const sessionId = await openSession();
    const created = await announce(sessionId, "sp09-b1.sg2", 100);
    const location = created.headers.get("location")!;
    for (const role of [null, ...ROLES] as Array<Role | null>) {
      if (role === null) signOut();
      else await signInAs(users[role]);
      const want = role === null ? 401 : role === "auditor" ? 403 : null;
      const answers = [
        await sessionsRoute.POST(new Request(`${ORIGIN}/api/upload-sessions`, { method: "POST", headers: { origin: ORIGIN, "content-type": "application/json" }, body: JSON.stringify({ profileId }) })),
        await announce(sessionId, `by-${role}.sg2`, 10),
        await head(location),
        await patch(location, 0, new Uint8Array(0)),
      ];
      for (const [i, res] of answers.entries()) {
        if (want === null) expect(res.status, `${role} request ${i}`).toBeLessThan(300);
        else expect(res.status, `${role} request ${i}`).toBe(want);
      }
    }
    const names = listUploadFiles(getDb(), sessionId).map((f) => f.name);
    expect(names).not.toContain("by-auditor.sg2");
    expect(names).not.toContain("by-null.sg2");
  });

  it("a transfer from another origin is refused (403) and records nothing", async () => {
    await signInAs(users.processor);
    const sessionId = await openSession();
    for (const origin of ["http://evil.example", "http://127.0.0.1:4000", "null"]) {
      const res = await announce(sessionId, "cross.sg2", 10, { origin });
      expect(res.status).toBe(403);
    }
    expect(listUploadFiles(getDb(), sessionId)).toEqual([]);
  });
});

describe("through the routes into an S3-compatible object store (s3rver, started here)", () => {
  let s3: LocalS3;
  const saved = { ...process.env };
  beforeAll(async () => {
    s3 = await startLocalS3("route-files");
  }, 30_000);
  afterAll(async () => {
    for (const k of Object.keys(process.env)) if (k.startsWith("TRACEWRIGHT_OBJECT_STORE_")) delete process.env[k];
    Object.assign(process.env, Object.fromEntries(Object.entries(saved).filter(([k]) => k.startsWith("TRACEWRIGHT_OBJECT_STORE_"))));
    await s3?.stop();
  });

  const complete = (sessionId: number) =>
    completeRoute.POST(new Request(`${ORIGIN}/api/upload-sessions/${sessionId}/complete`, { method: "POST", headers: { origin: ORIGIN, "content-type": "application/json" }, body: "{}" }), {
      params: Promise.resolve({ sessionId: String(sessionId) }),
    });

  it("the last chunk answers the verdict once the object is stored; completion answers 503 naming the setting and the key while the store refuses, then makes the dataset", async () => {
    Object.assign(process.env, s3.env, { TRACEWRIGHT_OBJECT_STORE_ATTEMPTS: "1" });
    await signInAs(users.processor);
    const sessionId = await openSession();
    const bytes = seg2(30, 6, 400);
    const sha = crypto.createHash("sha256").update(bytes).digest("hex");
    const c = await announce(sessionId, "sp30-b1.sg2", bytes.length);
    const r = await patch(c.headers.get("location")!, 0, bytes);
    expect(r.status).toBe(200);
    expect(await r.json()).toMatchObject({ verdict: "accepted", format: "seg2" });
    const key = `field-files/${sha.slice(0, 2)}/${sha}`;
    // The object's bytes, read back with the AWS SDK's own client.
    const client = new S3Client({ endpoint: s3.url, region: "us-east-1", forcePathStyle: true, credentials: { accessKeyId: s3.accessKeyId, secretAccessKey: s3.secretAccessKey }, responseChecksumValidation: "WHEN_REQUIRED" });
    const got = await client.send(new GetObjectCommand({ Bucket: s3.bucket, Key: key }));
    expect(crypto.createHash("sha256").update(await got.Body!.transformToByteArray()).digest("hex")).toBe(sha);
    client.destroy();
    expect(listUploadFiles(getDb(), sessionId)[0].storedPath).toBe(`s3://route-files/${key}`);

    process.env.TRACEWRIGHT_OBJECT_STORE_ACCESS_KEY_ID = "NOT-A-KEY";
    const refused = await complete(sessionId);
    expect(refused.status).toBe(503);
    const body = (await refused.json()) as { error: { code: string; message: string } } | { code: string; message: string };
    const text = JSON.stringify(body);
    expect(text).toContain("TRACEWRIGHT_OBJECT_STORE_ACCESS_KEY_ID");
    expect(text).toContain(key);
    process.env.TRACEWRIGHT_OBJECT_STORE_ACCESS_KEY_ID = s3.accessKeyId;
    const done = await complete(sessionId);
    expect(done.status, await done.clone().text()).toBe(200);
    const made = (await done.json()) as { datasetId: number; files: number };
    const dataset = getDataset(getDb(), made.datasetId)!;
    expect(crypto.createHash("sha256").update(fs.readFileSync(path.join(dataset.folderPath, "sp30-b1.sg2"))).digest("hex")).toBe(sha);
  });
});
