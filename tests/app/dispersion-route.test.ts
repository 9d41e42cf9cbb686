/**
 * GET /api/artifacts/:hash/dispersion: one window of a dispersion artifact as the pick editor
 * draws it. Checked against the artifact written (the image flat `[frequency][velocity]` as stored,
 * rounded to 4 decimals; the curves as [frequency, velocity] points) and the API's error shape
 * for a window that is not there.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it, vi } from "vitest";
import { cookieStore, signInAs } from "./session-cookie";

vi.mock("next/headers", () => ({ cookies: async () => cookieStore, headers: async () => new Headers() }));

import { closeDb, getDb } from "@/db/client";
import { artifacts } from "@/db/schema";
import { seedDemoUsers } from "@/db/seed";
import { getUserByEmail } from "@/db/queries/users";
import { writeArtifact } from "@/pipeline/artifact-store";
import type { DispersionSet } from "@/pipeline/types";
import type { DispersionWindowJson } from "@/app/lib/view-types";
import { seededRandom } from "../helpers/random";
import * as dispersionRoute from "@/app/api/artifacts/[hash]/dispersion/route";

let tmp: string;
let hash: string;
let set: DispersionSet;

beforeAll(async () => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-dispersion-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  process.env.NEXTAUTH_SECRET = "dispersion-route-test-secret-0123456789abcdef";
  const db = getDb();
  const auditor = seedDemoUsers(db).find((a) => a.role === "auditor")!;
  const u = getUserByEmail(db, auditor.email)!;
  await signInAs({ id: u.id, role: u.role, name: u.name, email: u.email });
  const rnd = seededRandom(77);
  const nf = 5;
  const nv = 7;
  const window = (id: string, centreX: number) => ({
    id,
    centreX,
    receiverX0: centreX - 5,
    receiverX1: centreX + 5,
    gatherIds: ["sp01", "sp02"],
    traceCount: 20,
    minOffsetM: 2,
    maxOffsetM: 12,
    image: Float32Array.from({ length: nf * nv }, () => rnd.uniform()),
    picks: [
      { mode: 0, origin: "automatic" as const, frequenciesHz: Float64Array.from([10, 15, 20]), velocitiesMps: Float64Array.from([300, 250, 210]) },
      { mode: 0, origin: "hand" as const, frequenciesHz: Float64Array.from([12, 18]), velocitiesMps: Float64Array.from([280, 230]) },
    ],
  });
  set = {
    kind: "dispersion",
    frequenciesHz: Float64Array.from({ length: nf }, (_, i) => 10 + 5 * i),
    velocitiesMps: Float64Array.from({ length: nv }, (_, j) => 100 + 50 * j),
    normalisation: "per-frequency",
    windows: [window("W01", 5), window("W02", 10)],
  };
  const w = writeArtifact(set);
  db.insert(artifacts).values({ hash: w.hash, kind: "dispersion", path: w.relativePath, sizeBytes: w.sizeBytes }).onConflictDoNothing().run();
  hash = w.hash;
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

const get = (query: string) => dispersionRoute.GET(new Request(`http://127.0.0.1/api/artifacts/${hash}/dispersion${query}`), { params: Promise.resolve({ hash }) });

describe("GET /api/artifacts/:hash/dispersion", () => {
  it("answers the asked window with its axes, image and curves as stored", async () => {
    const res = await get("?window=W02");
    expect(res.status).toBe(200);
    const body = (await res.json()) as DispersionWindowJson;
    expect(body.windows.map((w) => w.id)).toEqual(["W01", "W02"]);
    expect(body.frequenciesHz).toEqual(Array.from(set.frequenciesHz));
    expect(body.velocitiesMps).toEqual(Array.from(set.velocitiesMps));
    expect(body.window.id).toBe("W02");
    // Rounded to 4 decimals: within half of 1e-4 of the stored float32 values.
    const stored = set.windows[1].image;
    expect(body.window.image).toHaveLength(stored.length);
    body.window.image.forEach((v, i) => expect(Math.abs(v - stored[i])).toBeLessThanOrEqual(5e-5 + 1e-12));
    expect(body.window.picks).toEqual([
      { mode: 0, origin: "automatic", points: [[10, 300], [15, 250], [20, 210]] },
      { mode: 0, origin: "hand", points: [[12, 280], [18, 230]] },
    ]);
    expect(body.window.modelled).toBeNull();
    // Without a window: the first.
    expect(((await (await get("")).json()) as DispersionWindowJson).window.id).toBe("W01");
  });

  it("answers 404 naming the windows there for a window that is not", async () => {
    const res = await get("?window=W09");
    expect(res.status).toBe(404);
    const body = (await res.json()) as { error: { message: string; field?: string } };
    expect(body.error.message).toMatch(/No window "W09" here\. Windows: W01, W02\./);
    expect(body.error.field).toBe("window");
  });
});
