/**
 * The control room's lead and auditor paths: one approval per decision (a second identical
 * decision is refused by the server action), the review state in the runs list and its
 * "awaiting review" filter, step results downloaded through the export writers, and a run's audit
 * trail exported as CSV (RFC 4180) and JSON. SEG-Y layout checked against the SEG-Y rev 2.0
 * standard (SEG Technical Standards Committee 2017: 3200-byte textual header, 400-byte binary
 * header with the sample format code at bytes 3225-3226, 5 = IEEE float).
 */
import { createHash } from "node:crypto";
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it, vi } from "vitest";
import { cookieStore, signInAs, signOut } from "./session-cookie";

vi.mock("next/headers", () => ({ cookies: async () => cookieStore, headers: async () => new Headers() }));
vi.mock("next/cache", () => ({ revalidatePath: vi.fn() }));

import { closeDb, getDb } from "@/db/client";
import { seedDemoUsers } from "@/db/seed";
import { getUserByEmail } from "@/db/queries/users";
import { listReviews } from "@/db/queries/reviews";
import { executeRun } from "@/pipeline/runner";
import { createRun } from "@/pipeline/run-create";
import { decideRun } from "@/app/lib/actions/reviews";
import { readRunList } from "@/app/lib/reads";
import { csvField } from "@/app/lib/audit-export";
import { registerEngineTestSteps } from "../helpers/engine-steps";
import * as downloadRoute from "@/app/api/runs/[runId]/steps/[stepLabel]/download/route";
import * as auditExportRoute from "@/app/api/runs/[runId]/audit-export/route";

let tmp: string;
let runId: number;
const users: Record<string, { id: number; role: "admin" | "lead" | "processor" | "auditor"; name: string; email: string }> = {};
const params = <T extends Record<string, string>>(p: T) => ({ params: Promise.resolve(p) });
const get = (url: string) => new Request(`http://127.0.0.1${url}`);

beforeAll(async () => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-cr-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  process.env.NEXTAUTH_SECRET = "control-room-test-secret-0123456789abcdef";
  registerEngineTestSteps();
  const db = getDb();
  for (const a of seedDemoUsers(db)) {
    const u = getUserByEmail(db, a.email)!;
    users[a.role] = { id: u.id, role: u.role, name: u.name, email: u.email };
  }
  const file = path.join(tmp, "check.yaml");
  fs.writeFileSync(file, `name: cr-check\nsurvey: test-site\nsteps:\n  - step: test-make-traces\n    settings: { traces: 4, samples: 16, value: 1 }\n  - step: test-scale\n    label: scale\n    settings: { factor: 3 }\n`);
  runId = createRun(db, { source: "pipeline-file", pipelinePath: file, actor: { userId: null, label: "tester", door: "cli" } }).runId;
  await executeRun(db, runId);
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("review decisions", () => {
  it("lists a succeeded run without a decision as awaiting review", () => {
    const awaiting = readRunList({ review: "awaiting" });
    expect(awaiting.rows.map((r) => r.id)).toContain(runId);
    expect(awaiting.rows.find((r) => r.id === runId)?.review).toBeNull();
  });

  it("refuses a processor", async () => {
    await signInAs(users.processor);
    const state = await decideRun({ runId, decision: "approved", comment: "" });
    expect(state.error).toMatch(/may not approve/);
  });

  it("records one approval; a second identical decision is refused", async () => {
    await signInAs(users.lead);
    const [first, second] = await Promise.all([
      decideRun({ runId, decision: "approved", comment: "checked" }),
      decideRun({ runId, decision: "approved", comment: "checked" }),
    ]);
    expect([first.ok, second.ok].filter(Boolean)).toHaveLength(1);
    expect([first.error, second.error].find(Boolean)).toMatch(/already approved/);
    expect(listReviews(getDb(), runId).filter((r) => r.decision === "approved")).toHaveLength(1);
    const third = await decideRun({ runId, decision: "approved", comment: "again" });
    expect(third.error).toMatch(/already approved/);
  });

  it("shows the latest decision in the runs list and filters by it", () => {
    expect(readRunList({ review: "awaiting" }).rows.map((r) => r.id)).not.toContain(runId);
    const approved = readRunList({ review: "approved" });
    expect(approved.rows.find((r) => r.id === runId)?.review).toMatchObject({ decision: "approved", reviewer: "Rosa Okafor-Lind" });
    expect(approved.total).toBe(approved.rows.length);
  });
});

describe("downloads", () => {
  it("writes a step's gathers as SEG-Y rev 2.0 with IEEE float samples", async () => {
    await signInAs(users.auditor);
    const res = await downloadRoute.GET(get(`/api/runs/${runId}/steps/scale/download?slot=gathers`), params({ runId: String(runId), stepLabel: "scale" }));
    expect(res.status).toBe(200);
    expect(res.headers.get("content-disposition")).toBe(`attachment; filename="run-${runId}-scale-gathers.sgy"`);
    const bytes = Buffer.from(await res.arrayBuffer());
    expect(bytes.readUInt16BE(3224)).toBe(5);
    // 4 traces × (240-byte trace header + 16 samples × 4 bytes) after the 3600 bytes of file headers.
    expect(bytes.length).toBe(3600 + 4 * (240 + 16 * 4));
  });

  it("answers 404 naming the slots a step wrote", async () => {
    await signInAs(users.processor);
    const res = await downloadRoute.GET(get(`/api/runs/${runId}/steps/scale/download?slot=model`), params({ runId: String(runId), stepLabel: "scale" }));
    expect(res.status).toBe(404);
    expect((await res.json()).error.message).toMatch(/wrote gathers/);
  });

  it("needs a signed-in person", async () => {
    signOut();
    const res = await downloadRoute.GET(get(`/api/runs/${runId}/steps/scale/download`), params({ runId: String(runId), stepLabel: "scale" }));
    expect(res.status).toBe(401);
  });
});

describe("audit export", () => {
  it("quotes CSV fields as RFC 4180 says", () => {
    expect(csvField('say "yes", then go')).toBe('"say ""yes"", then go"');
    expect(csvField("two\nlines")).toBe('"two\nlines"');
    expect(csvField("plain")).toBe("plain");
    expect(csvField(null)).toBe("");
  });

  it("exports a run's trail as CSV and JSON with names, oldest first", async () => {
    await signInAs(users.auditor);
    const csv = await auditExportRoute.GET(get(`/api/runs/${runId}/audit-export?format=csv`), params({ runId: String(runId) }));
    expect(csv.status).toBe(200);
    const text = await csv.text();
    const lines = text.split("\r\n");
    expect(lines[0]).toBe("event,when_utc,who,recorded_as,door,action,record_type,record_id,record_name,before,after,prev_hash,hash");
    expect(text).toMatch(/Rosa Okafor-Lind,Rosa Okafor-Lind,web,review\.approve,run,/);
    const json = await auditExportRoute.GET(get(`/api/runs/${runId}/audit-export?format=json`), params({ runId: String(runId) }));
    const body = (await json.json()) as { events: Array<{ id: number; action: string; after: unknown }> };
    expect(body.events.map((e) => e.action)).toContain("review.approve");
    expect(body.events.map((e) => e.id)).toEqual([...body.events.map((e) => e.id)].sort((a, b) => a - b));
    expect(body.events.find((e) => e.action === "review.approve")?.after).toEqual({ decision: "approved", comment: "checked" });
  });

  it("gives each exported event its chain hashes and the text hashed, checkable with any SHA-256", async () => {
    await signInAs(users.auditor);
    const json = await auditExportRoute.GET(get(`/api/runs/${runId}/audit-export?format=json`), params({ runId: String(runId) }));
    const body = (await json.json()) as {
      chain: { intact: boolean; checked: number; head: { id: number; hash: string } };
      events: Array<{ id: number; prevHash: string; hash: string; hashedText: string }>;
    };
    expect(body.chain.intact).toBe(true);
    expect(body.events.length).toBeGreaterThan(0);
    for (const e of body.events) {
      // SHA-256 by node:crypto (FIPS 180-4) of the exported text is the exported hash ...
      expect(createHash("sha256").update(e.hashedText, "utf8").digest("hex")).toBe(e.hash);
      // ... and the text names the event and the hash before it.
      const text = JSON.parse(e.hashedText) as unknown[];
      expect(text.slice(0, 3)).toEqual(["tracewright-audit-event/1", e.prevHash, e.id]);
    }
    const csv = await (await auditExportRoute.GET(get(`/api/runs/${runId}/audit-export?format=csv`), params({ runId: String(runId) }))).text();
    expect(csv).toContain(`,${body.events[0].prevHash},${body.events[0].hash}\r\n`);
  });
});
