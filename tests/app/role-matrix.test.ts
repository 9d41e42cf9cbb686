/**
 * The role matrix: every route handler under app/api and every server action, for every role and
 * for nobody signed in, generated from the permission tables (app/lib/permissions.ts). Allowed
 * means a 2xx answer (an action: an `ok` state); refused means 401 without a session and 403 with
 * a role that lacks the permission. The table itself is checked against the files on disk, so a
 * new handler or action that is not in it fails here.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it, vi } from "vitest";
import { NextRequest } from "next/server";
import { cookieStore, signInAs, signOut } from "./session-cookie";

vi.mock("next/headers", () => ({ cookies: async () => cookieStore, headers: async () => new Headers() }));
vi.mock("next/cache", () => ({ revalidatePath: vi.fn() }));
vi.mock("@/pipeline/launch", async (importOriginal) => {
  const actual = await importOriginal<typeof import("@/pipeline/launch")>();
  return { ...actual, launchInBackground: vi.fn(), launchReproductionInBackground: vi.fn() };
});

import { closeDb, getDb } from "@/db/client";
import { artifacts, ROLES, type Role } from "@/db/schema";
import { seedDemoUsers } from "@/db/seed";
import { createUser, getUserByEmail } from "@/db/queries/users";
import { issuePasswordToken } from "@/db/queries/password-tokens";
import { ensureSurvey } from "@/db/queries/surveys";
import { getRun } from "@/db/queries/runs";
import { getPipelineVersion, listVersionsOfPipeline } from "@/db/queries/pipelines";
import { editorModel, versionDefinition } from "@/pipeline/pipeline-edit";
import { writeArtifact } from "@/pipeline/artifact-store";
import { executeRun } from "@/pipeline/runner";
import { createRun } from "@/pipeline/run-create";
import { ACTION_REQUIREMENTS, ROUTE_REQUIREMENTS, meets, type Requirement } from "@/app/lib/permissions";
import type { FormState } from "@/app/lib/actions/form-state";
import { registerEngineTestSteps } from "../helpers/engine-steps";
import { runInversionFixture } from "../helpers/inverted-run";
import { addReview } from "@/db/queries/reviews";
import { createReport } from "@/pipeline/report/create";

type Handler = (req: Request, ctx: { params: Promise<Record<string, string | string[]>> }) => Promise<Response>;
type Case = () => { url: string; body?: unknown; params?: Record<string, string | string[]>; headers?: Record<string, string>; rawBody?: Uint8Array<ArrayBuffer> };

const root = path.resolve(__dirname, "../..");
const ORIGIN = "http://127.0.0.1:3000";
let tmp: string;
const users = {} as Record<Role, { id: number; role: Role; name: string; email: string }>;
let reviewCount = 0;
const fx = { runId: 0, fieldCheckRunId: 0, pipelineVersionId: 0, datasetId: 0, gathers: "", model: "", snapshots: "", picks: "", spectra: "", dispersion: "", spare: 0, invertedRunId: 0, report: "", profileId: 0, uploadId: 0, transferSessionId: 0, transfer: "" };
let surveyCount = 0;
let uploadFileCount = 0;
const tusHeaders = (extra: Record<string, string>) => ({ "tus-resumable": "1.0.0", ...extra });

/** Route files on disk, as the keys of ROUTE_REQUIREMENTS ("METHOD /api/..."). */
function routesOnDisk(): Array<{ key: string; file: string; method: string }> {
  const out: Array<{ key: string; file: string; method: string }> = [];
  const walk = (dir: string) => {
    for (const e of fs.readdirSync(dir, { withFileTypes: true })) {
      const full = path.join(dir, e.name);
      if (e.isDirectory()) walk(full);
      else if (e.name === "route.ts") {
        const src = fs.readFileSync(full, "utf8");
        const methods = new Set<string>();
        for (const m of src.matchAll(/export async function (GET|HEAD|POST|PUT|PATCH|DELETE)\b/g)) methods.add(m[1]);
        for (const m of src.matchAll(/handler as (GET|POST|PUT|PATCH|DELETE)\b/g)) methods.add(m[1]);
        const route = "/" + path.relative(path.join(root, "app"), path.dirname(full)).split(path.sep).join("/");
        for (const method of methods) out.push({ key: `${method} ${route}`, file: full, method });
      }
    }
  };
  walk(path.join(root, "app/api"));
  return out;
}

/** A request that is allowed through for a role holding the permission, per route. */
const CASES: Record<string, Case> = {
  "GET /api/runs": () => ({ url: "/api/runs" }),
  "POST /api/runs": () => ({ url: "/api/runs", body: { pipelineVersionId: fx.pipelineVersionId, datasetId: fx.datasetId } }),
  "GET /api/runs/[runId]": () => ({ url: `/api/runs/${fx.runId}`, params: { runId: String(fx.runId) } }),
  "POST /api/runs/[runId]/cancel": () => ({ url: `/api/runs/${fx.spare}/cancel`, body: {}, params: { runId: String(fx.spare) } }),
  "GET /api/runs/[runId]/logs": () => ({ url: `/api/runs/${fx.runId}/logs`, params: { runId: String(fx.runId) } }),
  "POST /api/runs/[runId]/rerun": () => ({ url: `/api/runs/${fx.runId}/rerun`, body: { fromLabel: "scale", overrides: { scale: { factor: 2 } } }, params: { runId: String(fx.runId) } }),
  "GET /api/runs/[runId]/reviews": () => ({ url: `/api/runs/${fx.runId}/reviews`, params: { runId: String(fx.runId) } }),
  // A distinct comment each time: repeating the latest decision word for word is refused (409).
  "POST /api/runs/[runId]/reviews": () => ({ url: `/api/runs/${fx.runId}/reviews`, body: { decision: "returned", comment: `check sp03 (${++reviewCount})` }, params: { runId: String(fx.runId) } }),
  "GET /api/runs/[runId]/steps/[stepLabel]": () => ({ url: `/api/runs/${fx.runId}/steps/scale`, params: { runId: String(fx.runId), stepLabel: "scale" } }),
  "GET /api/runs/[runId]/steps/[stepLabel]/download": () => ({ url: `/api/runs/${fx.runId}/steps/scale/download`, params: { runId: String(fx.runId), stepLabel: "scale" } }),
  "GET /api/runs/[runId]/steps/[stepLabel]/intermediates": () => ({ url: `/api/runs/${fx.runId}/steps/scale/intermediates`, params: { runId: String(fx.runId), stepLabel: "scale" } }),
  "GET /api/runs/[runId]/audit-export": () => ({ url: `/api/runs/${fx.runId}/audit-export?format=json`, params: { runId: String(fx.runId) } }),
  "GET /api/runs/[runId]/reports/[hash]": () => ({ url: `/api/runs/${fx.invertedRunId}/reports/${fx.report}`, params: { runId: String(fx.invertedRunId), hash: fx.report } }),
  "GET /api/artifacts/[hash]/field": () => ({ url: `/api/artifacts/${fx.model}/field`, params: { hash: fx.model } }),
  "GET /api/artifacts/[hash]": () => ({ url: `/api/artifacts/${fx.gathers}`, params: { hash: fx.gathers } }),
  "GET /api/artifacts/[hash]/lines": () => ({ url: `/api/artifacts/${fx.picks}/lines?gather=g1`, params: { hash: fx.picks } }),
  "GET /api/artifacts/[hash]/model": () => ({ url: `/api/artifacts/${fx.model}/model`, params: { hash: fx.model } }),
  "GET /api/artifacts/[hash]/positions": () => ({ url: `/api/artifacts/${fx.gathers}/positions`, params: { hash: fx.gathers } }),
  "GET /api/artifacts/[hash]/snapshots": () => ({ url: `/api/artifacts/${fx.snapshots}/snapshots?frame=1`, params: { hash: fx.snapshots } }),
  "GET /api/artifacts/[hash]/spectra": () => ({ url: `/api/artifacts/${fx.spectra}/spectra`, params: { hash: fx.spectra } }),
  "GET /api/artifacts/[hash]/dispersion": () => ({ url: `/api/artifacts/${fx.dispersion}/dispersion?window=W01`, params: { hash: fx.dispersion } }),
  "GET /api/artifacts/[hash]/traces": () => ({ url: `/api/artifacts/${fx.gathers}/traces`, params: { hash: fx.gathers } }),
  "GET /api/audit": () => ({ url: "/api/audit" }),
  "GET /api/pipeline-versions/[versionId]/yaml": () => ({ url: `/api/pipeline-versions/${fx.pipelineVersionId}/yaml`, params: { versionId: String(fx.pipelineVersionId) } }),
  "GET /api/surveys": () => ({ url: "/api/surveys?q=test" }),
  "POST /api/surveys": () => ({ url: "/api/surveys", body: { slug: `matrix-survey-${++surveyCount}`, name: `Matrix survey ${surveyCount}` } }),
  "GET /api/surveys/[slug]": () => ({ url: "/api/surveys/test-site", params: { slug: "test-site" } }),
  "POST /api/surveys/[slug]/profiles": () => ({
    url: "/api/surveys/test-site/profiles",
    body: { name: `M-${++surveyCount}`, crs: "EPSG:27700", startX: 0, startY: 0, endX: 47, endY: 0 },
    params: { slug: "test-site" },
  }),
  "POST /api/upload-sessions": () => ({ url: "/api/upload-sessions", body: { profileId: fx.profileId } }),
  "GET /api/upload-sessions/[sessionId]": () => ({ url: `/api/upload-sessions/${fx.uploadId}`, params: { sessionId: String(fx.uploadId) } }),
  "POST /api/upload-sessions/[sessionId]/complete": () => ({ url: `/api/upload-sessions/${fx.uploadId}/complete`, body: {}, params: { sessionId: String(fx.uploadId) } }),
  "POST /api/uploads/[[...path]]": () => ({
    url: "/api/uploads",
    headers: tusHeaders({ "upload-length": "64", "upload-metadata": `sessionId ${btoa(String(fx.transferSessionId))},filename ${btoa(`matrix-${++uploadFileCount}.sg2`)}` }),
  }),
  // Two bytes more of a 64-byte transfer at the offset the server holds.
  "PATCH /api/uploads/[[...path]]": () => ({
    url: `/api/uploads/${fx.transfer}`,
    params: { path: [fx.transfer] },
    headers: tusHeaders({ "content-type": "application/offset+octet-stream", "upload-offset": String(fs.statSync(path.join(tmp, "uploads", "transfers", fx.transfer)).size) }),
    rawBody: new Uint8Array([1, 2]),
  }),
  "HEAD /api/uploads/[[...path]]": () => ({ url: `/api/uploads/${fx.transfer}`, params: { path: [fx.transfer] }, headers: tusHeaders({}) }),
  "GET /api/field-checks/[runId]": () => ({ url: `/api/field-checks/${fx.fieldCheckRunId}`, params: { runId: String(fx.fieldCheckRunId) } }),
  "GET /api/auth/[...nextauth]": () => ({ url: "/api/auth/providers", params: { nextauth: ["providers"] } }),
  "POST /api/auth/[...nextauth]": () => ({ url: "/api/auth/_log", body: {}, params: { nextauth: ["_log"] } }),
};

function record(kind: string, value: unknown): string {
  const w = writeArtifact(value);
  getDb().insert(artifacts).values({ hash: w.hash, kind, path: w.relativePath, sizeBytes: w.sizeBytes }).onConflictDoNothing().run();
  return w.hash;
}

beforeAll(async () => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-matrix-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  delete process.env.TRACEWRIGHT_SMTP_HOST;
  process.env.NEXTAUTH_SECRET = "role-matrix-test-secret-0123456789abcdef";
  process.env.NEXTAUTH_URL = ORIGIN;
  registerEngineTestSteps();
  const db = getDb();
  for (const a of seedDemoUsers(db)) {
    const u = getUserByEmail(db, a.email)!;
    users[u.role] = { id: u.id, role: u.role, name: u.name, email: u.email };
    demoPasswords[u.role] = a.password;
  }
  const file = path.join(tmp, "matrix.yaml");
  fs.writeFileSync(file, "name: matrix\nsurvey: test-site\nsteps:\n  - step: test-make-traces\n    settings: { traces: 3, samples: 8, value: 1 }\n  - step: test-scale\n    label: scale\n    settings: { factor: 3 }\n");
  const prepared = createRun(db, { source: "pipeline-file", pipelinePath: file, actor: { userId: users.processor.id, label: users.processor.name, door: "cli" } });
  fx.runId = prepared.runId;
  ensureSurvey(db, "test-site", "matrix-line");
  fx.profileId = (await import("@/db/queries/surveys")).ensureSurvey(db, "test-site", "M1").profile!.id;
  await prepareUpload();
  fx.transferSessionId = (await import("@/pipeline/uploads")).openUpload(db, fx.profileId, { userId: users.admin.id, label: "admin", door: "cli" }).id;
  await executeRun(db, fx.runId);
  const fieldFile = path.join(tmp, "matrix-field.yaml");
  fs.writeFileSync(fieldFile, "name: matrix-field\nsurvey: test-site\nsteps:\n  - step: test-make-traces\n    settings: { traces: 6, samples: 300, value: 1 }\n  - step: field-check\n");
  fx.fieldCheckRunId = createRun(db, { source: "pipeline-file", pipelinePath: fieldFile, actor: { userId: users.processor.id, label: users.processor.name, door: "cli" } }).runId;
  await executeRun(db, fx.fieldCheckRunId);
  const run = getRun(db, fx.runId)!;
  fx.gathers = run.steps[1].outputs.gathers;
  fx.pipelineVersionId = run.pipelineVersionId!;
  fx.datasetId = run.datasetId!;
  const nx = 3;
  const nz = 2;
  fx.model = record("model", { kind: "model", nx, nz, spacingM: 1, originX: 0, originZ: 0, vp: new Float32Array(6).fill(500), vs: new Float32Array(6).fill(200), rho: new Float32Array(6).fill(1800) });
  fx.snapshots = record("snapshots", { kind: "snapshots", shotId: "g1", component: "vz", nx, nz, spacingM: 1, originX: 0, originZ: 0, timesS: [0, 0.01], frames: new Float32Array(12) });
  fx.picks = record("picks", { kind: "picks", method: "energy-ratio", picks: [{ gatherId: "g1", traceIndex: 0, timeS: 0.01, quality: 0.9, flagged: false }] });
  // An approved inversion run with one client report, for the report download and actions.
  fx.invertedRunId = await runInversionFixture(db, tmp, { lowPassHz: [40], iterations: 1 });
  addReview(db, { runId: fx.invertedRunId, reviewerUserId: users.lead.id, decision: "approved", comment: "" });
  fx.report = (await createReport(db, fx.invertedRunId, { userId: users.lead.id, label: users.lead.name, door: "cli" })).hash;
  fx.dispersion = record("dispersion", {
    kind: "dispersion",
    frequenciesHz: new Float64Array([10, 20]),
    velocitiesMps: new Float64Array([100, 200]),
    normalisation: "per-frequency",
    windows: [{ id: "W01", centreX: 5, receiverX0: 0, receiverX1: 10, gatherIds: ["g1"], traceCount: 3, minOffsetM: 1, maxOffsetM: 10, image: new Float32Array([1, 0.5, 0.2, 1]), picks: [{ mode: 0, origin: "automatic", frequenciesHz: new Float64Array([10, 20]), velocitiesMps: new Float64Array([100, 200]) }] }],
  });
  fx.spectra = record("spectra", { kind: "spectra", frequenciesHz: new Float32Array([0, 10]), gathers: [{ gatherId: "g1", mean: new Float32Array([1, 2]), perTrace: new Float32Array([1, 2]) }] });
}, 180_000);

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

/** An open upload on the matrix profile with one accepted file (completing it needs one), and a transfer in progress. */
async function prepareUpload(): Promise<void> {
  const { openUpload, admitFile, checkArrivedFile, transfersDir, uploadLimits } = await import("@/pipeline/uploads");
  const { writeSeg2 } = await import("@/pipeline/io/seg2");
  const actor = { userId: users.admin.id, label: "admin", door: "cli" as const };
  fx.uploadId = openUpload(getDb(), fx.profileId, actor).id;
  const bytes = writeSeg2({ fileStrings: {}, traces: [{ strings: { SAMPLE_INTERVAL: "0.001" }, samples: new Float32Array([0, 1, 0, -1]) }] });
  const transferId = `matrix-accepted-${fx.uploadId}`;
  admitFile(getDb(), { sessionId: fx.uploadId, transferId, name: "accepted.sg2", sizeBytes: bytes.length, limits: uploadLimits() });
  fs.mkdirSync(transfersDir(), { recursive: true });
  fs.writeFileSync(path.join(transfersDir(), transferId), bytes);
  await checkArrivedFile(getDb(), transferId, path.join(transfersDir(), transferId));
}

async function prepareCaseAsync(key: string): Promise<void> {
  if (key === "POST /api/upload-sessions/[sessionId]/complete") await prepareUpload();
  if (key === "PATCH /api/uploads/[[...path]]" || key === "HEAD /api/uploads/[[...path]]") {
    if (!fx.transfer) {
      await signInAs(users.processor);
      const res = await call("POST /api/uploads/[[...path]]", "processor", {}, undefined, true);
      fx.transfer = res.headers.get("location")!.split("/").pop()!;
    }
  }
}

function prepareCase(key: string): void {
  if (key === "POST /api/runs/[runId]/cancel") fx.spare = createRun(getDb(), { source: "pipeline-version", pipelineVersionId: fx.pipelineVersionId, datasetId: fx.datasetId, actor: { userId: users.admin.id, label: "admin", door: "cli" } }).runId;
}

async function call(key: string, role: Role | null, headers: Record<string, string> = {}, rawBody?: string, prepared = false): Promise<Response> {
  const [method, route] = key.split(" ");
  const mod = (await import(/* @vite-ignore */ path.join(root, "app", route.slice(1), "route.ts"))) as Record<string, Handler>;
  if (role === null) signOut();
  else await signInAs(users[role]);
  if (!prepared) {
    prepareCase(key);
    await prepareCaseAsync(key);
    if (role === null) signOut();
    else await signInAs(users[role]);
  }
  const c = CASES[key]();
  const init: RequestInit = { method, headers: { origin: ORIGIN, host: "127.0.0.1:3000" } };
  if (method !== "GET" && method !== "HEAD") {
    init.headers = { ...init.headers, "content-type": "application/json" };
    init.body = c.rawBody ?? rawBody ?? JSON.stringify(c.body ?? {});
  }
  init.headers = { ...init.headers, ...c.headers };
  init.headers = Object.fromEntries(Object.entries({ ...init.headers, ...headers }).filter(([, v]) => v !== ""));
  // next-auth reads `nextUrl`: a NextRequest, as Next hands to every route handler.
  return mod[method](new NextRequest(`${ORIGIN}${c.url}`, init as ConstructorParameters<typeof NextRequest>[1]), { params: Promise.resolve(c.params ?? {}) });
}

const who: Array<Role | null> = [null, ...ROLES];

describe("the permission tables cover the code", () => {
  it("lists every route handler on disk, and nothing else", () => {
    const disk = routesOnDisk().map((r) => r.key).sort();
    expect(disk).toEqual(Object.keys(ROUTE_REQUIREMENTS).sort());
    expect(Object.keys(CASES).sort()).toEqual(Object.keys(ROUTE_REQUIREMENTS).sort());
  });

  it("lists every server action, and nothing else", async () => {
    const dir = path.join(root, "app/lib/actions");
    const exported: string[] = [];
    for (const f of fs.readdirSync(dir)) {
      const src = fs.readFileSync(path.join(dir, f), "utf8");
      if (!/^["']use server["'];/m.test(src)) continue;
      for (const m of src.matchAll(/export async function (\w+)/g)) exported.push(m[1]);
    }
    expect(exported.sort()).toEqual(Object.keys(ACTION_REQUIREMENTS).sort());
  });
});

describe("route handlers × roles", () => {
  for (const [key, requirement] of Object.entries(ROUTE_REQUIREMENTS)) {
    for (const role of who) {
      const allowed = meets(role, requirement as Requirement);
      if (requirement === "public") {
        // next-auth's own routes read the request scope through its CommonJS build, which a unit
        // test cannot provide; what this table promises for them is that the sign-in gate lets
        // them through without a session (the browser tests sign in through them).
        it(`${key} as ${role ?? "nobody"}: not gated`, async () => {
          const { isPublicPath } = await import("@/proxy");
          expect(isPublicPath(new URL(CASES[key]().url, ORIGIN).pathname)).toBe(true);
        });
        continue;
      }
      it(`${key} as ${role ?? "nobody"}: ${allowed ? "2xx" : role === null ? "401" : "403"}`, async () => {
        const res = await call(key, role);
        if (allowed) expect(res.status, await res.clone().text()).toBeGreaterThanOrEqual(200);
        if (allowed) expect(res.status, await res.clone().text()).toBeLessThan(300);
        else expect(res.status).toBe(role === null ? 401 : 403);
      });
    }
  }
});

function form(fields: Record<string, string>): FormData {
  const f = new FormData();
  for (const [k, v] of Object.entries(fields)) f.set(k, v);
  return f;
}

let added = 0;
/** Valid input per server action, so that an allowed caller gets an `ok` answer. */
const ACTION_INPUT: Record<string, () => FormData> = {
  addUser: () => form({ name: `Matrix Person ${++added}`, email: `matrix${added}@example.org`, role: "processor", password: "a-long-enough-password" }),
  changeRole: () => form({ userId: String(users.auditor.id), role: "auditor" }),
  changeActive: () => form({ userId: String(users.auditor.id), active: "true" }),
  changeOwnPassword: () => form({ current: demoPasswords[currentRole!], next: `${demoPasswords[currentRole!]}-2`, repeat: `${demoPasswords[currentRole!]}-2` }),
  decideRun: () => form({ runId: String(fx.runId), decision: "returned", comment: `matrix check ${++reviewCount}` }),
  // Each allowed save changes the scale factor, so each makes a new version on the newest one.
  savePipeline: () => form({ factor: String(10 + ++saved) }),
  startReproduction: () => form({ runId: String(fx.runId) }),
  saveRunInterpretation: () => form({ runId: String(fx.invertedRunId), summary: `matrix interpretation ${++reviewCount}` }),
  makeRunReport: () => form({ runId: String(fx.invertedRunId), positions: "", shots: "" }),
  saveNoticePreferences: () => form({ "run-stopped": "on", "review-waiting": ++surveyCount % 2 ? "on" : "" }),
  requestPasswordReset: () => form({ email: users.processor.email }),
  setPasswordWithLink: () => {
    const db = getDb();
    const holder = getUserByEmail(db, "link-holder@example.org") ?? createUser(db, { email: "link-holder@example.org", name: "Link Holder", role: "processor", password: "link-holder-password" });
    const { token } = issuePasswordToken(db, holder.id, "reset");
    return form({ token, next: `fresh-password-${++surveyCount}`, repeat: `fresh-password-${surveyCount}` });
  },
  addSurvey: () => form({ slug: `action-survey-${++surveyCount}`, name: `Action survey ${surveyCount}` }),
  editSurvey: () => form({ slug: "test-site", name: `Test site ${++surveyCount}`, client: "Matrix client" }),
  addSurveyProfile: () => form({ survey: "test-site", name: `A-${++surveyCount}`, crs: "EPSG:27700", startX: "0", startY: "0", endX: "47", endY: "1" }),
  editSurveyProfile: () => form({ survey: "test-site", name: "matrix-line", spreadDescription: `spread ${++surveyCount}` }),
  putPersonOnSurvey: () => form({ survey: "test-site", email: users.lead.email, role: ++surveyCount % 2 ? "lead" : "processor" }),
};
let saved = 0;
let currentRole: Role | null = null;
const demoPasswords = {} as Record<Role, string>;

describe("server actions × roles", () => {
  for (const [name, requirement] of Object.entries(ACTION_REQUIREMENTS)) {
    for (const role of who) {
      const allowed = meets(role, requirement);
      it(`${name} as ${role ?? "nobody"}: ${allowed ? "done" : "refused"}`, async () => {
        const { decideRun } = await import("@/app/lib/actions/reviews");
        const { savePipeline } = await import("@/app/lib/actions/pipelines");
        const { startReproduction } = await import("@/app/lib/actions/reproductions");
        const { saveRunInterpretation, makeRunReport } = await import("@/app/lib/actions/reports");
        const actions = {
          ...(await import("@/app/lib/actions/users")),
          ...(await import("@/app/lib/actions/account")),
          ...(await import("@/app/lib/actions/surveys")),
          ...(await import("@/app/lib/actions/password")),
          // decideRun takes its input as an object (the approve button calls it directly).
          decideRun: (_prev: FormState, f: FormData) =>
            decideRun({ runId: Number(f.get("runId")), decision: f.get("decision") as "approved" | "returned", comment: String(f.get("comment")) }),
          // savePipeline takes the editor's model: the matrix pipeline's newest version with the scale factor changed.
          savePipeline: (_prev: FormState, f: FormData) => {
            const pv = getPipelineVersion(getDb(), fx.pipelineVersionId)!;
            const newest = listVersionsOfPipeline(getDb(), pv.pipeline.id)[0];
            const model = editorModel(versionDefinition(newest));
            const steps = model.steps.map((s) => (s.label === "scale" ? { ...s, settings: { ...s.settings, factor: Number(f.get("factor")) } } : s));
            return savePipeline({ pipelineId: pv.pipeline.id, baseVersionId: newest.id, description: model.description, onBadFile: model.onBadFile, steps });
          },
          // so does startReproduction (the reproduce button)
          startReproduction: (_prev: FormState, f: FormData) => startReproduction({ runId: Number(f.get("runId")) }),
          // The report form sends objects too.
          saveRunInterpretation: (_prev: FormState, f: FormData) => saveRunInterpretation({ runId: Number(f.get("runId")), sections: { summary: String(f.get("summary")) } }),
          makeRunReport: (_prev: FormState, f: FormData) => makeRunReport({ runId: Number(f.get("runId")), positions: String(f.get("positions")), shots: String(f.get("shots")) }),
        } as unknown as Record<string, (prev: FormState, f: FormData) => Promise<FormState>>;
        currentRole = role;
        if (role === null) signOut();
        else await signInAs(users[role]);
        const state = await actions[name]({}, ACTION_INPUT[name]());
        if (allowed) {
          expect(state.error).toBeUndefined();
          expect(state.ok).toBeTruthy();
        } else if (role === null) expect(state.error).toBe("Sign in to continue.");
        else expect(state.error).toMatch(/role may not/);
        if (!allowed && role === "auditor" && requirement === "surveys.edit") expect(state.error).toMatch(/may not change surveys or profiles/);
      });
    }
  }
});

describe("cross-site writes are refused on every state-changing route handler", () => {
  const mutating = Object.entries(ROUTE_REQUIREMENTS).filter(([k, r]) => !k.startsWith("GET ") && !k.startsWith("HEAD ") && r !== "public").map(([k]) => k);

  it("covers the state-changing handlers", () => {
    expect(mutating.sort()).toEqual([
      "PATCH /api/uploads/[[...path]]",
      "POST /api/runs",
      "POST /api/runs/[runId]/cancel",
      "POST /api/runs/[runId]/rerun",
      "POST /api/runs/[runId]/reviews",
      "POST /api/surveys",
      "POST /api/surveys/[slug]/profiles",
      "POST /api/upload-sessions",
      "POST /api/upload-sessions/[sessionId]/complete",
      "POST /api/uploads/[[...path]]",
    ]);
  });

  const foreign: Array<[string, Record<string, string>]> = [
    ["another site", { origin: "http://evil.example" }],
    ["another port of the same host", { origin: "http://127.0.0.1:4000" }],
    ["a sibling host", { origin: "http://lab.127.0.0.1.nip.io:3000" }],
    ["an opaque origin", { origin: "null" }],
    ["a cross-site page without Origin", { origin: "", "sec-fetch-site": "cross-site" }],
    ["a same-site page without Origin", { origin: "", "sec-fetch-site": "same-site" }],
  ];
  for (const key of mutating) {
    for (const [what, headers] of foreign) {
      it(`${key} from ${what}: 403, nothing changed`, async () => {
        const db = getDb();
        prepareCase(key);
        const before = (await import("@/db/queries/audit")).listAudit(db, {}).length;
        const runsBefore = (await import("@/db/queries/runs")).listRuns(db, {}).total;
        const cancelsBefore = fx.spare ? getRun(db, fx.spare)?.cancelRequested : undefined;
        const res = await call(key, "admin", headers, undefined, true);
        expect(res.status).toBe(403);
        expect((await res.json()).error.code).toBe("forbidden");
        expect((await import("@/db/queries/audit")).listAudit(db, {}).length).toBe(before);
        expect((await import("@/db/queries/runs")).listRuns(db, {}).total).toBe(runsBefore);
        if (fx.spare) expect(getRun(db, fx.spare)?.cancelRequested).toBe(cancelsBefore);
      });
    }
    // The resumable transfer sends file bytes, not JSON: the tus protocol's own headers
    // (Tus-Resumable, which a page on another site cannot send without a preflight the server
    // never grants) stand for the JSON content type there (tests/app/uploads-route.test.ts).
    if (key.includes("/api/uploads/")) continue;
    it(`${key} with a text/plain body from our own origin: 415`, async () => {
      const res = await call(key, "admin", { "content-type": "text/plain" });
      expect(res.status).toBe(415);
      expect((await res.json()).error.message).toMatch(/application\/json/);
    });
    it(`${key} from a program (no Origin, no Sec-Fetch-Site) with JSON: allowed`, async () => {
      const res = await call(key, "admin", { origin: "" });
      expect(res.status).toBeLessThan(300);
    });
  }
});

describe("bad input is a 4xx naming the field, never a 500", () => {
  it("a prototype key in rerun overrides: 400 naming it", async () => {
    for (const body of ['{"fromLabel":"scale","overrides":{"__proto__":{"factor":9}}}', '{"fromLabel":"scale","overrides":{"scale":{"constructor":1}}}']) {
      const res = await call("POST /api/runs/[runId]/rerun", "processor", {}, body);
      expect(res.status, body).toBe(400);
      expect((await res.json()).error.field).toMatch(/^body\.overrides\.(__proto__|scale\.constructor)$/);
    }
  });

  it("a prototype key in an edited pipeline's settings: refused naming it, nothing saved", async () => {
    const { savePipeline } = await import("@/app/lib/actions/pipelines");
    const db = getDb();
    const pv = getPipelineVersion(db, fx.pipelineVersionId)!;
    const newest = listVersionsOfPipeline(db, pv.pipeline.id)[0];
    const model = editorModel(versionDefinition(newest));
    await signInAs(users.processor);
    const steps = model.steps.map((s) => (s.label === "scale" ? { ...s, settings: JSON.parse('{"factor":5,"constructor":1}') as Record<string, unknown> } : s));
    const state = await savePipeline({ pipelineId: pv.pipeline.id, baseVersionId: newest.id, description: model.description, onBadFile: model.onBadFile, steps });
    const i = model.steps.findIndex((s) => s.label === "scale");
    expect(state.fields).toEqual({ [`steps[${i}].settings.constructor`]: expect.stringMatching(/not allowed/) });
    expect(listVersionsOfPipeline(db, pv.pipeline.id)[0].id).toBe(newest.id);
  });

  it("a step label with a % that is not an escape: 404 naming the label, not 500", async () => {
    // Next hands route handlers their params already decoded (a literal "%E0%A4%A" in the URL
    // arrives as that text when it cannot be decoded); decoding again threw URIError.
    const mod = await import("@/app/api/runs/[runId]/steps/[stepLabel]/route");
    await signInAs(users.processor);
    const res = await mod.GET(new Request(`${ORIGIN}/api/runs/${fx.runId}/steps/%25E0%25A4%25A`), { params: Promise.resolve({ runId: String(fx.runId), stepLabel: "%E0%A4%A" }) });
    expect(res.status).toBe(404);
    expect((await res.json()).error.message).toContain('no step "%E0%A4%A"');
  });
});

describe("the pipeline editor for an auditor (reads everything, changes nothing)", () => {
  it("saving is refused with the role's message and records no version and no audit event", async () => {
    const { savePipeline } = await import("@/app/lib/actions/pipelines");
    const { listAudit } = await import("@/db/queries/audit");
    const db = getDb();
    const pv = getPipelineVersion(db, fx.pipelineVersionId)!;
    const newest = listVersionsOfPipeline(db, pv.pipeline.id)[0];
    const model = editorModel(versionDefinition(newest));
    const versionsBefore = listVersionsOfPipeline(db, pv.pipeline.id).length;
    const auditBefore = listAudit(db, {}).length;
    await signInAs(users.auditor);
    const steps = model.steps.map((s) => (s.label === "scale" ? { ...s, settings: { ...s.settings, factor: 99 } } : s));
    const state = await savePipeline({ pipelineId: pv.pipeline.id, baseVersionId: newest.id, description: model.description, onBadFile: model.onBadFile, steps });
    expect(state.error).toBe("The auditor role may not edit pipelines.");
    expect(listVersionsOfPipeline(db, pv.pipeline.id).length).toBe(versionsBefore);
    expect(listAudit(db, {}).length).toBe(auditBefore);
  });

  it("the editor page answers 403 (Next's forbidden()), the pipeline page opens", async () => {
    // next build sets this from next.config.mjs (experimental.authInterrupts); a unit test sets it itself.
    process.env.__NEXT_EXPERIMENTAL_AUTH_INTERRUPTS = "true";
    await signInAs(users.auditor);
    const pv = getPipelineVersion(getDb(), fx.pipelineVersionId)!;
    const params = Promise.resolve({ pipelineId: String(pv.pipeline.id) });
    const edit = (await import("@/app/(control)/pipelines/[pipelineId]/edit/page")).default;
    // forbidden() throws Next's HTTP fallback error, whose digest carries the status the page answers.
    await expect(edit({ params })).rejects.toMatchObject({ digest: "NEXT_HTTP_ERROR_FALLBACK;403" });
    const view = (await import("@/app/(control)/pipelines/[pipelineId]/page")).default;
    await expect(view({ params, searchParams: Promise.resolve({}) })).resolves.toBeTruthy();
    await signInAs(users.processor);
    await expect(edit({ params })).resolves.toBeTruthy();
  });
});
