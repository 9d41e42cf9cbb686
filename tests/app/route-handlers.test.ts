/**
 * Route handlers of the control room: every handler checks the role through the one
 * permission table, rejects bad input with a clear JSON error, and goes through the engine for
 * reruns. The behaviour checked is our own specification (the role table and the API
 * error shape); the binary trace format is checked against the gather the engine stored.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it, vi } from "vitest";
import { cookieStore, setRawSessionToken, signInAs, signOut } from "./session-cookie";

vi.mock("next/headers", () => ({
  cookies: async () => cookieStore,
  headers: async () => new Headers(),
}));
// Reruns are queued for real; only the detached engine process is not started in unit tests.
vi.mock("@/pipeline/launch", async (importOriginal) => {
  const actual = await importOriginal<typeof import("@/pipeline/launch")>();
  return { ...actual, launchInBackground: vi.fn() };
});

import { closeDb, getDb } from "@/db/client";
import { seedDemoUsers } from "@/db/seed";
import { getUserByEmail } from "@/db/queries/users";
import { listAudit } from "@/db/queries/audit";
import { getRun } from "@/db/queries/runs";
import { readArtifactSync } from "@/pipeline/artifact-store";
import { createRun, executeRun } from "@/pipeline/runner";
import { launchInBackground } from "@/pipeline/launch";
import type { GatherSet } from "@/pipeline/types";
import { decodeWire } from "@/app/lib/trace-wire";
import type { TraceHeaderWire } from "@/app/lib/view-types";
import { registerEngineTestSteps } from "../helpers/engine-steps";
import * as runsRoute from "@/app/api/runs/route";
import * as runRoute from "@/app/api/runs/[runId]/route";
import * as rerunRoute from "@/app/api/runs/[runId]/rerun/route";
import * as logsRoute from "@/app/api/runs/[runId]/logs/route";
import * as reviewsRoute from "@/app/api/runs/[runId]/reviews/route";
import * as stepRoute from "@/app/api/runs/[runId]/steps/[stepLabel]/route";
import * as tracesRoute from "@/app/api/artifacts/[hash]/traces/route";
import * as artifactRoute from "@/app/api/artifacts/[hash]/route";
import * as auditRoute from "@/app/api/audit/route";

let tmp: string;
let runId: number;
let gathersHash: string;
const users: Record<string, { id: number; role: "admin" | "lead" | "processor" | "auditor"; name: string; email: string }> = {};

const params = <T extends Record<string, string>>(p: T) => ({ params: Promise.resolve(p) });
const get = (url: string) => new Request(`http://127.0.0.1${url}`);
const post = (url: string, body: unknown) =>
  new Request(`http://127.0.0.1${url}`, { method: "POST", headers: { "content-type": "application/json" }, body: typeof body === "string" ? body : JSON.stringify(body) });

async function as(role: keyof typeof users) {
  await signInAs(users[role]);
}

beforeAll(async () => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-app-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  process.env.NEXTAUTH_SECRET = "route-handler-test-secret-0123456789abcdef";
  registerEngineTestSteps();
  const db = getDb();
  for (const a of seedDemoUsers(db)) {
    const u = getUserByEmail(db, a.email)!;
    users[a.role] = { id: u.id, role: u.role, name: u.name, email: u.email };
  }
  const file = path.join(tmp, "check.yaml");
  fs.writeFileSync(
    file,
    `name: route-check
survey: test-site
steps:
  - step: test-make-traces
    settings: { traces: 4, samples: 16, value: 1 }
  - step: test-scale
    label: scale
    settings: { factor: 3 }
`,
  );
  const prepared = createRun(db, { source: "pipeline-file", pipelinePath: file, actor: { userId: null, label: "tester", door: "cli" } });
  runId = prepared.runId;
  await executeRun(db, runId);
  gathersHash = getRun(db, runId)!.steps[1].outputs.gathers;
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("sign-in and roles", () => {
  it("answers 401 with a message when nobody is signed in", async () => {
    signOut();
    const res = await runsRoute.GET(get("/api/runs"));
    expect(res.status).toBe(401);
    expect((await res.json()).error.message).toMatch(/Sign in/);
  });

  it("answers 401 for a token signed with another secret", async () => {
    const { encode } = await import("next-auth/jwt");
    setRawSessionToken(await encode({ token: { userId: users.admin.id, role: "admin" }, secret: "some-other-secret" }));
    const res = await runsRoute.GET(get("/api/runs"));
    expect(res.status).toBe(401);
  });

  it("lets every role read runs", async () => {
    for (const role of ["admin", "lead", "processor", "auditor"] as const) {
      await as(role);
      const res = await runsRoute.GET(get("/api/runs"));
      expect(res.status, role).toBe(200);
      const body = await res.json();
      expect(body.total).toBeGreaterThanOrEqual(1);
      expect(body.rows[0]).toHaveProperty("status");
    }
  });

  it("refuses a rerun to the auditor with 403 and a message, and queues nothing", async () => {
    await as("auditor");
    const before = getRun(getDb(), runId)!.childRunIds.length;
    const res = await rerunRoute.POST(post(`/api/runs/${runId}/rerun`, { fromLabel: "scale", overrides: { scale: { factor: 5 } } }), params({ runId: String(runId) }));
    expect(res.status).toBe(403);
    expect((await res.json()).error).toMatchObject({ code: "forbidden", message: "The auditor role may not rerun steps." });
    expect(getRun(getDb(), runId)!.childRunIds.length).toBe(before);
  });

  it("refuses review to a processor and an auditor; a lead's approval is recorded with an audit event", async () => {
    for (const role of ["processor", "auditor"] as const) {
      await as(role);
      const res = await reviewsRoute.POST(post(`/api/runs/${runId}/reviews`, { decision: "approved" }), params({ runId: String(runId) }));
      expect(res.status, role).toBe(403);
    }
    await as("lead");
    const res = await reviewsRoute.POST(post(`/api/runs/${runId}/reviews`, { decision: "approved", comment: "fine" }), params({ runId: String(runId) }));
    expect(res.status).toBe(201);
    const events = listAudit(getDb(), { action: "review.approve", entityId: String(runId) });
    expect(events).toHaveLength(1);
    expect(events[0].actorLabel).toBe(users.lead.name);
    expect(events[0].door).toBe("web");
    // The same decision again is refused, not recorded twice (issue: duplicate approvals).
    const again = await reviewsRoute.POST(post(`/api/runs/${runId}/reviews`, { decision: "approved", comment: "fine" }), params({ runId: String(runId) }));
    expect(again.status).toBe(409);
    expect(listAudit(getDb(), { action: "review.approve", entityId: String(runId) })).toHaveLength(1);
  });

  it("needs a comment to send a run back", async () => {
    await as("lead");
    const res = await reviewsRoute.POST(post(`/api/runs/${runId}/reviews`, { decision: "returned", comment: "  " }), params({ runId: String(runId) }));
    expect(res.status).toBe(400);
    expect((await res.json()).error.field).toBe("comment");
  });

  it("keeps the audit trail from nobody who is signed in, and gives it to the auditor", async () => {
    signOut();
    expect((await auditRoute.GET(get("/api/audit"))).status).toBe(401);
    await as("auditor");
    const res = await auditRoute.GET(get("/api/audit?action=run.start"));
    expect(res.status).toBe(200);
    expect((await res.json()).events.length).toBeGreaterThanOrEqual(1);
  });

  it("refuses a deactivated user even with a valid token", async () => {
    const { setUserActive } = await import("@/db/queries/users");
    setUserActive(getDb(), users.processor.id, false);
    try {
      await as("processor");
      expect((await runsRoute.GET(get("/api/runs"))).status).toBe(401);
    } finally {
      setUserActive(getDb(), users.processor.id, true);
    }
  });
});

describe("bad input gets clear errors", () => {
  it("unknown run: 404 naming the id", async () => {
    await as("processor");
    const res = await runRoute.GET(get("/api/runs/9999"), params({ runId: "9999" }));
    expect(res.status).toBe(404);
    expect((await res.json()).error.message).toBe("No run with id 9999.");
  });

  it("a run id that is not a number: 400 naming the field", async () => {
    await as("processor");
    const res = await runRoute.GET(get("/api/runs/abc"), params({ runId: "abc" }));
    expect(res.status).toBe(400);
    expect((await res.json()).error).toMatchObject({ code: "bad-input", field: "runId" });
  });

  it("rerun of an unknown run: 404", async () => {
    await as("processor");
    const res = await rerunRoute.POST(post("/api/runs/9999/rerun", { fromLabel: "scale", overrides: {} }), params({ runId: "9999" }));
    expect(res.status).toBe(404);
  });

  it("malformed overrides (not an object per step): 400 naming the field", async () => {
    await as("processor");
    const res = await rerunRoute.POST(post(`/api/runs/${runId}/rerun`, { fromLabel: "scale", overrides: { scale: 5 } }), params({ runId: String(runId) }));
    expect(res.status).toBe(400);
    const body = await res.json();
    expect(body.error.code).toBe("bad-input");
    expect(body.error.field).toBe("overrides.scale");
  });

  it("a body that is not JSON: 400", async () => {
    await as("processor");
    const res = await rerunRoute.POST(post(`/api/runs/${runId}/rerun`, "{not json"), params({ runId: String(runId) }));
    expect(res.status).toBe(400);
    expect((await res.json()).error.message).toMatch(/^body/);
  });

  it("an override the step schema refuses: 400 from the engine naming step and setting", async () => {
    await as("processor");
    const res = await rerunRoute.POST(post(`/api/runs/${runId}/rerun`, { fromLabel: "scale", overrides: { scale: { factor: "three" } } }), params({ runId: String(runId) }));
    expect(res.status).toBe(400);
    const body = await res.json();
    expect(body.error.field).toMatch(/^scale/);
    expect(body.error.message).toMatch(/factor/);
  });

  it("an unknown step to rerun from: 400 listing the steps", async () => {
    await as("processor");
    const res = await rerunRoute.POST(post(`/api/runs/${runId}/rerun`, { fromLabel: "no-such-step", overrides: {} }), params({ runId: String(runId) }));
    expect(res.status).toBe(400);
    expect((await res.json()).error.message).toMatch(/scale/);
  });

  it("a runs filter with a bad status: 400 naming the field", async () => {
    await as("auditor");
    const res = await runsRoute.GET(get("/api/runs?status=exploded"));
    expect(res.status).toBe(400);
    expect((await res.json()).error.field).toBe("status");
  });

  it("an artifact hash that is not 64 hex digits: 400; an unknown one: 404", async () => {
    await as("auditor");
    expect((await artifactRoute.GET(get("/api/artifacts/xyz"), params({ hash: "xyz" }))).status).toBe(400);
    const unknown = "0".repeat(64);
    expect((await artifactRoute.GET(get(`/api/artifacts/${unknown}`), params({ hash: unknown }))).status).toBe(404);
  });

  it("an unknown gather: 404 listing the gathers", async () => {
    await as("auditor");
    const res = await tracesRoute.GET(get(`/api/artifacts/${gathersHash}/traces?gather=nope`), params({ hash: gathersHash }));
    expect(res.status).toBe(404);
    expect((await res.json()).error.message).toMatch(/g1/);
  });
});

describe("reading runs and traces", () => {
  it("a processor's rerun goes through the engine: queued with the overrides, parent recorded, launched", async () => {
    await as("processor");
    vi.mocked(launchInBackground).mockClear();
    const res = await rerunRoute.POST(post(`/api/runs/${runId}/rerun`, { fromLabel: "scale", overrides: { scale: { factor: 5 } } }), params({ runId: String(runId) }));
    expect(res.status).toBe(202);
    const { runId: newId } = await res.json();
    const child = getRun(getDb(), newId)!;
    expect(child.parentRunId).toBe(runId);
    expect(child.door).toBe("web");
    expect(child.startedByLabel).toBe(users.processor.name);
    expect(child.steps[1].params).toEqual({ factor: 5 });
    expect(launchInBackground).toHaveBeenCalledWith(newId);
  });

  it("a step answers with its settings and parameter documentation", async () => {
    await as("auditor");
    const res = await stepRoute.GET(get(`/api/runs/${runId}/steps/scale`), params({ runId: String(runId), stepLabel: "scale" }));
    expect(res.status).toBe(200);
    const body = await res.json();
    expect(body.step.params).toEqual({ factor: 3 });
    expect(body.paramDocs).toEqual([expect.objectContaining({ name: "factor", type: "number", default: 2 })]);
  });

  it("log lines stream after an id", async () => {
    await as("auditor");
    const all = await (await logsRoute.GET(get(`/api/runs/${runId}/logs`), params({ runId: String(runId) }))).json();
    expect(all.lines.length).toBeGreaterThan(1);
    const after = await (await logsRoute.GET(get(`/api/runs/${runId}/logs?after=${all.lines[0].id}`), params({ runId: String(runId) }))).json();
    expect(after.lines.map((l: { id: number }) => l.id)).toEqual(all.lines.slice(1).map((l: { id: number }) => l.id));
  });

  it("traces come back as float32 identical to the stored gather, with offsets in the header", async () => {
    await as("auditor");
    const res = await tracesRoute.GET(get(`/api/artifacts/${gathersHash}/traces?gather=g1`), params({ hash: gathersHash }));
    expect(res.status).toBe(200);
    expect(res.headers.get("content-type")).toBe("application/octet-stream");
    const { header, payload } = decodeWire<TraceHeaderWire>(await res.arrayBuffer());
    const stored = (readArtifactSync(gathersHash) as GatherSet).gathers[0];
    expect(header.traceCount).toBe(stored.traces.length);
    expect(header.sampleCount).toBe(stored.sampleCount);
    expect(header.decimation).toBe(1);
    expect(header.offsetsM).toEqual(stored.traces.map((t) => t.offset));
    expect(Array.from(payload)).toEqual(Array.from(stored.data));
  });

  it("asks for decimation only when the trace is longer than maxSamples", async () => {
    await as("auditor");
    const res = await tracesRoute.GET(get(`/api/artifacts/${gathersHash}/traces?gather=g1&maxSamples=16`), params({ hash: gathersHash }));
    const { header, payload } = decodeWire<TraceHeaderWire>(await res.arrayBuffer());
    expect(header.decimation).toBe(1); // 16 samples fit in 16
    expect(payload.length).toBe(4 * 16);
    // A longer gather (40 samples; the route accepts maxSamples of 16 or more) to reach the branch.
    const db = getDb();
    const file = path.join(tmp, "long.yaml");
    fs.writeFileSync(file, "name: route-long\nsurvey: test-site\nsteps:\n  - step: test-make-traces\n    settings: { traces: 2, samples: 40, value: -2 }\n");
    const longRun = createRun(db, { source: "pipeline-file", pipelinePath: file, actor: { userId: null, label: "tester", door: "cli" } });
    await executeRun(db, longRun.runId);
    const longHash = getRun(db, longRun.runId)!.steps[0].outputs.gathers;
    const stored = (readArtifactSync(longHash) as GatherSet).gathers[0];
    const ask = async (maxSamples: number) =>
      decodeWire<TraceHeaderWire>(
        await (await tracesRoute.GET(get(`/api/artifacts/${longHash}/traces?gather=g1&maxSamples=${maxSamples}`), params({ hash: longHash }))).arrayBuffer(),
      );
    expect((await ask(40)).header.decimation).toBe(1); // 40 fit in 40
    // One sample too many: the smallest whole factor that fits, ceil(40 / 39) = 2.
    const by2 = await ask(39);
    expect(by2.header.decimation).toBe(2);
    expect(by2.header.sampleCount).toBe(20);
    expect(by2.payload.length).toBe(2 * 20);
    // Keeping one sample per window of `factor` multiplies the sample interval by the factor (common practice).
    expect(by2.header.sampleIntervalS).toBeCloseTo(2 * stored.sampleIntervalS, 12);
    // ceil(40 / 16) = 3: ceil(40 / 3) = 14 samples per trace, the last window holding one sample.
    const by3 = await ask(16);
    expect(by3.header.decimation).toBe(3);
    expect(by3.header.sampleCount).toBe(14);
    expect(by3.header.sampleIntervalS).toBeCloseTo(3 * stored.sampleIntervalS, 12);
    expect(by3.header.startTimeS).toBe(stored.startTimeS);
    expect(Array.from(by3.payload)).toEqual(new Array(2 * 14).fill(-2));
  });
});

describe("starting a run from the control room (POST /api/runs)", () => {
  it("queues a run of a pipeline version on a dataset for a processor, records who and how, and the engine runs it", async () => {
    const db = getDb();
    const source = getRun(db, runId)!;
    await as("processor");
    vi.mocked(launchInBackground).mockClear();
    const res = await runsRoute.POST(post("/api/runs", { pipelineVersionId: source.pipelineVersionId, datasetId: source.datasetId }));
    expect(res.status).toBe(202);
    const { runId: started } = (await res.json()) as { runId: number };
    expect(started).not.toBe(runId);
    // Handed to the engine at once, and queued until the engine picks it up.
    expect(vi.mocked(launchInBackground).mock.calls).toEqual([[started]]);
    const queued = getRun(db, started)!;
    expect(queued).toMatchObject({
      status: "queued",
      door: "web",
      startedByUserId: users.processor.id,
      pipelineVersionId: source.pipelineVersionId,
      datasetId: source.datasetId,
      parentRunId: null,
    });
    expect(queued.steps.map((s) => [s.label, s.params])).toEqual(source.steps.map((s) => [s.label, s.params]));
    const events = listAudit(db, { action: "run.start", entityId: String(started) });
    expect(events).toHaveLength(1);
    expect(events[0]).toMatchObject({ actorLabel: users.processor.name, door: "web" });
    // What the background engine would do: execute it; same settings on the same data, so every
    // step is found in the cache and the outputs are those of the source run.
    const outcome = await executeRun(db, started);
    expect(outcome.status).toBe("succeeded");
    const done = getRun(db, started)!;
    expect(done.steps.map((s) => s.cacheHit)).toEqual([true, true]);
    expect(done.steps.map((s) => s.outputs)).toEqual(source.steps.map((s) => s.outputs));
  });

  it("answers 400 naming the field for a bad body, 404 for an unknown pipeline version, and queues nothing", async () => {
    const db = getDb();
    const source = getRun(db, runId)!;
    await as("processor");
    vi.mocked(launchInBackground).mockClear();
    const before = listAudit(db, { action: "run.start" }).length;
    const bad = await runsRoute.POST(post("/api/runs", { pipelineVersionId: "one", datasetId: source.datasetId }));
    expect(bad.status).toBe(400);
    expect((await bad.json()).error).toMatchObject({ code: "bad-input", field: "pipelineVersionId" });
    const unknown = await runsRoute.POST(post("/api/runs", { pipelineVersionId: 99_999, datasetId: source.datasetId }));
    expect(unknown.status).toBe(404);
    expect(vi.mocked(launchInBackground)).not.toHaveBeenCalled();
    expect(listAudit(db, { action: "run.start" }).length).toBe(before);
  });
});
