/**
 * GET /api/artifacts/:hash/field: models and inversion gradients as binary float32 grids, with
 * the same permission as the other artifact reads (the role table in DEVELOPERS.md) and the
 * wire layout of app/lib/trace-wire.ts (our specification), values bit for bit.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it, vi } from "vitest";
import { cookieStore, signInAs, signOut } from "./session-cookie";

vi.mock("next/headers", () => ({
  cookies: async () => cookieStore,
  headers: async () => new Headers(),
}));

import { closeDb, getDb } from "@/db/client";
import { seedDemoUsers } from "@/db/seed";
import { getUserByEmail } from "@/db/queries/users";
import { registerArtifact } from "@/db/queries/artifacts";
import { writeArtifact } from "@/pipeline/artifact-store";
import { decodeWire } from "@/app/lib/trace-wire";
import type { FieldWireHeader } from "@/app/lib/field-wire";
import * as fieldRoute from "@/app/api/artifacts/[hash]/field/route";
import { seededRandom } from "../helpers/random";

let tmp: string;
let auditor: { id: number; role: "auditor"; name: string; email: string };
const nx = 7;
const nz = 4;
const rand = seededRandom(5).uniform;
const gradVs = Float32Array.from({ length: nx * nz }, () => rand() - 0.5);
const gradVp = Float32Array.from({ length: nx * nz }, () => rand() - 0.5);
const vs = Float32Array.from({ length: nx * nz }, () => 100 + 200 * rand());
let gradientHash = "";
let modelHash = "";
let otherHash = "";

const params = (hash: string) => ({ params: Promise.resolve({ hash }) });
const get = (hash: string) => fieldRoute.GET(new Request(`http://127.0.0.1/api/artifacts/${hash}/field`), params(hash));

function store(value: unknown, kind: string): string {
  const w = writeArtifact(value);
  registerArtifact(getDb(), { hash: w.hash, kind, path: w.relativePath, sizeBytes: w.sizeBytes });
  return w.hash;
}

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-app-field-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  process.env.NEXTAUTH_SECRET = "route-handler-test-secret-0123456789abcdef";
  const db = getDb();
  const account = seedDemoUsers(db).find((a) => a.role === "auditor")!;
  const u = getUserByEmail(db, account.email)!;
  auditor = { id: u.id, role: "auditor", name: u.name, email: u.email };
  const grid = { nx, nz, spacingM: 0.25, originX: 2, originZ: 0 };
  gradientHash = store({ kind: "gradient", ...grid, parameters: ["vs", "vp"], vs: gradVs, vp: gradVp }, "gradient");
  modelHash = store({ kind: "model", ...grid, vs, vp: Float32Array.from(vs, (v) => 2 * v), rho: new Float32Array(nx * nz).fill(1800) }, "model");
  otherHash = store({ kind: "json", role: "note", data: { a: 1 } }, "json");
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("fields over HTTP", () => {
  it("answers 401 when nobody is signed in", async () => {
    signOut();
    expect((await get(gradientHash)).status).toBe(401);
  });

  it("sends a gradient's grids in the order of its parameters, bit for bit", async () => {
    await signInAs(auditor);
    const res = await get(gradientHash);
    expect(res.status).toBe(200);
    expect(res.headers.get("content-type")).toBe("application/octet-stream");
    const { header, payload } = decodeWire<FieldWireHeader>(await res.arrayBuffer());
    expect(header).toEqual({ kind: "gradient", nx, nz, spacingM: 0.25, originX: 2, originZ: 0, fields: ["vs", "vp"] });
    expect(Array.from(payload.subarray(0, nx * nz))).toEqual(Array.from(gradVs));
    expect(Array.from(payload.subarray(nx * nz))).toEqual(Array.from(gradVp));
  });

  it("sends a model as Vs, Vp, density", async () => {
    await signInAs(auditor);
    const { header, payload } = decodeWire<FieldWireHeader>(await (await get(modelHash)).arrayBuffer());
    expect(header.kind).toBe("model");
    expect(header.fields).toEqual(["vs", "vp", "rho"]);
    expect(payload.length).toBe(3 * nx * nz);
    expect(Array.from(payload.subarray(0, nx * nz))).toEqual(Array.from(vs));
    expect(payload[2 * nx * nz]).toBe(1800);
  });

  it("refuses other kinds and bad hashes with a message", async () => {
    await signInAs(auditor);
    const res = await get(otherHash);
    expect(res.status).toBe(400);
    expect((await res.json()).error.message).toMatch(/model or a gradient/);
    expect((await get("nothex")).status).toBe(400);
  });
});
