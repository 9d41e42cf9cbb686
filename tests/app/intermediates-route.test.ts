/**
 * GET /api/runs/:runId/steps/:stepLabel/intermediates: the control room reads what a long step
 * recorded along the way, with the same permission as the other run reads (our specification:
 * the role table in DEVELOPERS.md) and the API error shape for unknown steps.
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
import { createRun, executeRun } from "@/pipeline/runner";
import { readArtifactSync } from "@/pipeline/artifact-store";
import { registerEngineTestSteps } from "../helpers/engine-steps";
import * as intermediatesRoute from "@/app/api/runs/[runId]/steps/[stepLabel]/intermediates/route";

let tmp: string;
let runId: number;
let auditor: { id: number; role: "auditor"; name: string; email: string };

const params = (p: { runId: string; stepLabel: string }) => ({ params: Promise.resolve(p) });
const get = (url: string) => new Request(`http://127.0.0.1${url}`);

beforeAll(async () => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-app-intermediates-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  process.env.NEXTAUTH_SECRET = "route-handler-test-secret-0123456789abcdef";
  registerEngineTestSteps();
  const db = getDb();
  const account = seedDemoUsers(db).find((a) => a.role === "auditor")!;
  const u = getUserByEmail(db, account.email)!;
  auditor = { id: u.id, role: "auditor", name: u.name, email: u.email };
  const file = path.join(tmp, "iterate.yaml");
  fs.writeFileSync(
    file,
    `name: route-iterate
survey: test-site
steps:
  - step: test-make-traces
    settings: { value: 2 }
  - step: test-iterate
    label: invert
    settings: { iterations: 3 }
`,
  );
  runId = createRun(db, { source: "pipeline-file", pipelinePath: file, actor: { userId: null, label: "tester", door: "cli" } }).runId;
  await executeRun(db, runId);
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("intermediate results over HTTP", () => {
  it("answers 401 when nobody is signed in", async () => {
    signOut();
    const res = await intermediatesRoute.GET(get(`/api/runs/${runId}/steps/invert/intermediates`), params({ runId: String(runId), stepLabel: "invert" }));
    expect(res.status).toBe(401);
  });

  it("lists a step's records in order with their artifact hashes", async () => {
    await signInAs(auditor);
    const res = await intermediatesRoute.GET(get(`/api/runs/${runId}/steps/invert/intermediates`), params({ runId: String(runId), stepLabel: "invert" }));
    expect(res.status).toBe(200);
    const body = (await res.json()) as { intermediates: Array<{ kind: string; index: number; label: string; hash: string; meta: unknown }> };
    expect(body.intermediates.map((x) => [x.kind, x.index, x.label])).toEqual([
      ["model", 0, "iteration 1"],
      ["model", 1, "iteration 2"],
      ["model", 2, "iteration 3"],
    ]);
    // x <- 1.5 x + 1 from 2: 4, 7, 11.5 (closed form 1.5^n * 4 - 2).
    const values = body.intermediates.map((x) => (readArtifactSync(x.hash) as { values: Float64Array }).values[0]);
    expect(values).toEqual([4, 7, 11.5]);
  });

  it("an unknown step: 404 naming the steps", async () => {
    await signInAs(auditor);
    const res = await intermediatesRoute.GET(get(`/api/runs/${runId}/steps/nope/intermediates`), params({ runId: String(runId), stepLabel: "nope" }));
    expect(res.status).toBe(404);
    expect((await res.json()).error.message).toContain("invert");
  });
});
