/**
 * The engine: caching, reruns, failure, cancel, crash recovery and concurrent writers.
 * These are behaviours of our own design, checked against their specification in
 * DEVELOPERS.md (no outside numeric reference is involved).
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { execa } from "execa";
import { eq } from "drizzle-orm";
import { afterAll, beforeAll, beforeEach, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../../db/client";
import { runs, stepLogs } from "../../../db/schema";
import { getRun, listRuns } from "../../../db/queries/runs";
import { listAudit } from "../../../db/queries/audit";
import { hasArtifact, readArtifactSync } from "../../../pipeline/artifact-store";
import {
  createRun,
  executeRun,
  HEARTBEAT_STALE_MS,
  markInterruptedRuns,
  prepareResume,
  requestCancel,
} from "../../../pipeline/runner";
import { calls, registerEngineTestSteps } from "../../helpers/engine-steps";
import type { GatherSet } from "../../../pipeline/types";

const actor = { userId: null, label: "tester", door: "cli" as const };
let tmp: string;
let db: Db;

function writePipeline(name: string, body: string): string {
  const file = path.join(tmp, `${name}.yaml`);
  fs.writeFileSync(file, body);
  return file;
}

const THREE_STEPS = `name: engine-check
survey: test-site
steps:
  - step: test-make-traces
    settings: { traces: 4, samples: 16, value: 1 }
  - step: test-scale
    label: first-scale
    settings: { factor: 3 }
  - step: test-scale
    label: second-scale
    settings: { factor: 2 }
`;

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-engine-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  registerEngineTestSteps();
  db = getDb();
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

beforeEach(() => {
  for (const k of Object.keys(calls)) delete calls[k];
});

describe("running and caching", () => {
  it("runs every step, records it and stores content-addressed artifacts", async () => {
    const file = writePipeline("three", THREE_STEPS);
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    const outcome = await executeRun(db, runId);
    expect(outcome.status).toBe("succeeded");
    const detail = getRun(db, runId)!;
    expect(detail.steps.map((s) => [s.label, s.status, s.cacheHit])).toEqual([
      ["test-make-traces", "succeeded", false],
      ["first-scale", "succeeded", false],
      ["second-scale", "succeeded", false],
    ]);
    const out = detail.steps[2].outputs.gathers;
    expect(hasArtifact(out)).toBe(true);
    const set = readArtifactSync(out) as GatherSet;
    // 1 * 3 * 2 = 6 everywhere
    expect(Array.from(set.gathers[0].data)).toEqual(new Array(64).fill(6));
    expect(detail.steps[1].inputs.gathers).toBe(detail.steps[0].outputs.gathers);
    expect(detail.steps[1].series[0].points[0].y).toBe(3);
    expect(getRun(db, runId)!.steps.every((s) => s.durationMs !== null)).toBe(true);
    const logs = db.select().from(stepLogs).where(eq(stepLogs.runId, runId)).all();
    expect(logs.some((l) => l.message === "scaling")).toBe(true);
  });

  it("a second run of the same pipeline is served entirely from the cache", async () => {
    const file = writePipeline("three", THREE_STEPS);
    await executeRun(db, createRun(db, { source: "pipeline-file", pipelinePath: file, actor }).runId);
    for (const k of Object.keys(calls)) delete calls[k];
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    await executeRun(db, runId);
    expect(calls).toEqual({});
    expect(getRun(db, runId)!.steps.every((s) => s.cacheHit)).toBe(true);
  });

  it("a rerun of the last step with a changed setting recomputes only that step", async () => {
    const file = writePipeline("three", THREE_STEPS);
    const { runId: parent } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    await executeRun(db, parent);
    for (const k of Object.keys(calls)) delete calls[k];
    const child = createRun(db, { source: "rerun", parentRunId: parent, fromLabel: "second-scale", overrides: { "second-scale": { factor: 5 } }, actor }).runId;
    const outcome = await executeRun(db, child);
    expect(outcome.status).toBe("succeeded");
    expect(calls).toEqual({ "test-scale": 1 });
    const detail = getRun(db, child)!;
    expect(detail.parentRunId).toBe(parent);
    expect(detail.steps.map((s) => s.cacheHit)).toEqual([true, true, false]);
    expect(detail.steps[2].params).toEqual({ factor: 5 });
    const set = readArtifactSync(detail.steps[2].outputs.gathers) as GatherSet;
    expect(set.gathers[0].data[0]).toBe(15);
    expect(listAudit(db, { entityType: "run", entityId: String(child) })[0].action).toBe("run.rerun");
  });

  it("a rerun refuses overrides before its start step and unknown settings, naming them", () => {
    const runId = createRun(db, { source: "pipeline-file", pipelinePath: writePipeline("three", THREE_STEPS), actor }).runId;
    expect(() => createRun(db, { source: "rerun", parentRunId: runId, fromLabel: "second-scale", overrides: { "first-scale": { factor: 1 } }, actor }).runId).toThrow(
      /first-scale: this step comes before second-scale/,
    );
    expect(() => createRun(db, { source: "rerun", parentRunId: runId, fromLabel: "second-scale", overrides: { "second-scale": { fcator: 1 } }, actor }).runId).toThrow(
      /second-scale.fcator: unknown setting; valid settings of test-scale: factor/,
    );
    expect(() => createRun(db, { source: "rerun", parentRunId: runId, fromLabel: "second-scale", overrides: { "second-scale": { factor: "x" } }, actor }).runId).toThrow(
      /second-scale.factor/,
    );
    expect(() => createRun(db, { source: "rerun", parentRunId: 99999, fromLabel: "x", overrides: {}, actor }).runId).toThrow(/Run 99999 does not exist/);
  });

  it("a changed pipeline file becomes a new version; an unchanged one does not", () => {
    const file = writePipeline("versions", THREE_STEPS.replace("engine-check", "versioned"));
    const a = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    const b = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    expect(b.pipelineVersion).toBe(a.pipelineVersion);
    fs.writeFileSync(file, THREE_STEPS.replace("engine-check", "versioned").replace("factor: 2", "factor: 4"));
    const c = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    expect(c.pipelineVersion).toBe(a.pipelineVersion + 1);
    for (const id of [a.runId, b.runId, c.runId]) requestCancel(db, id, actor);
  });
});

describe("failure and cancel", () => {
  it("a failing step fails the run with its message and keeps earlier artifacts", async () => {
    const file = writePipeline(
      "fails",
      `name: engine-fails
survey: test-site
steps:
  - step: test-make-traces
    settings: { value: 7 }
  - step: test-fail
  - step: test-scale
`,
    );
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    const outcome = await executeRun(db, runId);
    expect(outcome.status).toBe("failed");
    expect(outcome.error).toBe("test-fail: the traces are not what this step expects (test)");
    const detail = getRun(db, runId)!;
    expect(detail.steps.map((s) => s.status)).toEqual(["succeeded", "failed", "skipped"]);
    expect(hasArtifact(detail.steps[0].outputs.gathers)).toBe(true);
    expect(detail.error).toMatch(/test-fail/);
  });

  it("a cancel request stops the run at the next check and keeps finished steps", async () => {
    const file = writePipeline(
      "cancel",
      `name: engine-cancel
survey: test-site
steps:
  - step: test-make-traces
    settings: { value: 9 }
  - step: test-wait
    settings: { ms: 60000, startedFlagFile: ${JSON.stringify(path.join(tmp, "cancel-started.flag"))} }
  - step: test-scale
`,
    );
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    const running = executeRun(db, runId, { cancelPollMs: 50 });
    // Cancel once the waiting step has started (its flag file appears), not after a fixed time.
    const deadline = Date.now() + 30_000;
    while (!fs.existsSync(path.join(tmp, "cancel-started.flag")) && Date.now() < deadline) await new Promise((r) => setTimeout(r, 20));
    requestCancel(db, runId, actor);
    const outcome = await running;
    expect(outcome.status).toBe("cancelled");
    const detail = getRun(db, runId)!;
    expect(detail.steps.map((s) => s.status)).toEqual(["succeeded", "cancelled", "cancelled"]);
    expect(hasArtifact(detail.steps[0].outputs.gathers)).toBe(true);
  });
});

describe("stopping a run", () => {
  it("the run's record says cancelled the moment the stopped step's does, before the engine does anything more", async () => {
    // Specification (DEVELOPERS.md, "Stopping a run"): a cancelled step ends its run in the same
    // transaction. Observed through the engine's own events: when the stopped step's end is
    // announced, the run's record already reads "cancelled" with its end time and waiting steps
    // cancelled, and no later step has started.
    const flag = path.join(tmp, "stop-order.flag");
    const file = writePipeline(
      "stop-order",
      `name: engine-stop-order
survey: test-site
steps:
  - step: test-make-traces
    settings: { value: 5 }
  - step: test-wait
    settings: { ms: 60000, startedFlagFile: ${JSON.stringify(flag)} }
  - step: test-scale
`,
    );
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    const seen: string[] = [];
    let atStepEnd: { run: string; finished: boolean; steps: string[] } | null = null;
    const running = executeRun(db, runId, {
      cancelPollMs: 50,
      events: {
        onStepStart: (e) => seen.push(`start ${e.label}`),
        onStepEnd: (e) => {
          seen.push(`end ${e.label} ${e.status}`);
          if (e.status === "cancelled") {
            const r = getRun(db, runId)!;
            atStepEnd = { run: r.status, finished: r.finishedAt !== null, steps: r.steps.map((x) => x.status) };
          }
        },
      },
    });
    const deadline = Date.now() + 30_000;
    while (!fs.existsSync(flag) && Date.now() < deadline) await new Promise((r) => setTimeout(r, 20));
    seen.push("cancel requested");
    requestCancel(db, runId, actor);
    const outcome = await running;
    seen.push(`outcome ${outcome.status}`);
    expect(seen).toEqual([
      "start test-make-traces",
      "end test-make-traces succeeded",
      "start test-wait",
      "cancel requested",
      "end test-wait cancelled",
      "outcome cancelled",
    ]);
    expect(atStepEnd).toEqual({ run: "cancelled", finished: true, steps: ["succeeded", "cancelled", "cancelled"] });
    const detail = getRun(db, runId)!;
    expect(detail.status).toBe("cancelled");
    expect(detail.error).toBe("The run was cancelled.");
    expect(detail.steps[1].error).toBe("cancelled");
  });
});

const tsxChild = (script: string, args: string[]) =>
  execa(process.execPath, ["--import", "tsx", path.join(process.cwd(), "tests/fixtures/engine", script), ...args], {
    env: { ...process.env, TRACEWRIGHT_DATA_DIR: tmp },
    reject: false,
  });

describe("crash recovery", () => {
  it("a killed run is marked interrupted at the next start and resumes from its first unfinished step", async () => {
    const flag = path.join(tmp, "started.flag");
    const release = path.join(tmp, "release.flag");
    const file = writePipeline(
      "crash",
      `name: engine-crash
survey: test-site
steps:
  - step: test-make-traces
    settings: { value: 11 }
  - step: test-scale
    settings: { factor: 10 }
  - step: test-wait
    settings: { ms: 60000, startedFlagFile: ${JSON.stringify(flag)}, releaseFile: ${JSON.stringify(release)} }
  - step: test-scale
    label: after-wait
`,
    );
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    const child = tsxChild("execute-run.ts", [String(runId)]);
    const deadline = Date.now() + 30_000;
    while (!fs.existsSync(flag) && Date.now() < deadline) await new Promise((r) => setTimeout(r, 50));
    expect(fs.existsSync(flag)).toBe(true);
    child.kill("SIGKILL");
    await child;
    expect(db.select().from(runs).where(eq(runs.id, runId)).get()!.status).toBe("running");

    expect(markInterruptedRuns(db)).toContain(runId);
    const interrupted = getRun(db, runId)!;
    expect(interrupted.status).toBe("interrupted");
    expect(interrupted.steps.map((s) => s.status)).toEqual(["succeeded", "succeeded", "cancelled", "waiting"]);

    // Let the waiting step finish at once when it runs again.
    fs.writeFileSync(release, "");
    for (const k of Object.keys(calls)) delete calls[k];
    prepareResume(db, runId, actor);
    const outcome = await executeRun(db, runId);
    expect(outcome.status).toBe("succeeded");
    // The two finished steps were kept, not recomputed.
    expect(calls).toEqual({ "test-wait": 1, "test-scale": 1 });
    const set = readArtifactSync(getRun(db, runId)!.steps[3].outputs.gathers) as GatherSet;
    expect(set.gathers[0].data[0]).toBe(11 * 10 * 2);
    expect(listAudit(db, { entityType: "run", entityId: String(runId), action: "run.resume" })).toHaveLength(1);
  });
});

describe("what a run used stays what it used", () => {
  it("a rerun uses the geometry table of its parent run, even after the file changed or went", async () => {
    const table = path.join(tmp, "line-geometry.csv");
    fs.writeFileSync(table, "first version\n");
    const file = writePipeline(
      "table",
      `name: engine-table
survey: test-site
geometryTable: ./line-geometry.csv
steps:
  - step: test-read-table
`,
    );
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    await executeRun(db, runId);
    fs.writeFileSync(table, "edited later\n");
    const child = createRun(db, { source: "rerun", parentRunId: runId, fromLabel: "test-read-table", overrides: { "test-read-table": { tag: "again" } }, actor }).runId;
    fs.rmSync(table);
    expect((await executeRun(db, child)).status).toBe("succeeded");
    const report = readArtifactSync(getRun(db, child)!.steps[0].outputs.report) as { data: string };
    expect(report.data).toBe("first version\n");
  });

  it("a running run whose heartbeat is stale is marked interrupted even when its process id is in use", () => {
    const file = writePipeline("stale", "name: engine-stale\nsurvey: test-site\nsteps:\n  - step: test-make-traces\n");
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    // As if a process had claimed it long ago and the machine restarted: this test's own pid is alive.
    db.update(runs)
      .set({ status: "running", hostPid: process.ppid, heartbeatAt: new Date(Date.now() - HEARTBEAT_STALE_MS - 1000) })
      .where(eq(runs.id, runId))
      .run();
    expect(markInterruptedRuns(db)).toEqual([runId]);
    db.update(runs).set({ status: "running", heartbeatAt: new Date() }).where(eq(runs.id, runId)).run();
    expect(markInterruptedRuns(db)).toEqual([]);
    db.update(runs).set({ status: "cancelled" }).where(eq(runs.id, runId)).run();
  });
});

describe("ownership of a running run", () => {
  it("a run marked interrupted under a live process stops there and never overwrites the mark", async () => {
    const flag = path.join(tmp, "owned.flag");
    const file = writePipeline(
      "owned",
      `name: engine-owned
survey: test-site
steps:
  - step: test-make-traces
    settings: { value: 13 }
  - step: test-wait
    settings: { ms: 20000, startedFlagFile: ${JSON.stringify(flag)} }
  - step: test-scale
`,
    );
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    const running = executeRun(db, runId, { cancelPollMs: 50 });
    const deadline = Date.now() + 10_000;
    while (!fs.existsSync(flag) && Date.now() < deadline) await new Promise((r) => setTimeout(r, 20));
    // Another door decides the process is gone (a stale heartbeat, say).
    db.update(runs).set({ status: "interrupted" }).where(eq(runs.id, runId)).run();
    const outcome = await running;
    expect(outcome.status).toBe("cancelled");
    expect(outcome.error).toMatch(/taken over by another process/);
    const detail = getRun(db, runId)!;
    expect(detail.status).toBe("interrupted");
    expect(detail.steps[2].status).toBe("waiting");
  });
});

describe("stuck queued runs", () => {
  it("a queued run nobody executed can be resumed, which executes it", async () => {
    const file = writePipeline("queued", "name: engine-queued\nsurvey: test-site\nsteps:\n  - step: test-make-traces\n    settings: { value: 3 }\n");
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    prepareResume(db, runId, actor);
    expect((await executeRun(db, runId)).status).toBe("succeeded");
    expect(() => prepareResume(db, runId, actor)).toThrow(/only queued, interrupted, failed or cancelled runs can be resumed/);
  });
});

describe("concurrent writers", () => {
  it("several processes run pipelines into one database at the same time without losing records", async () => {
    const files = [0, 1, 2].map((i) =>
      writePipeline(
        `parallel-${i}`,
        `name: engine-parallel-${i}
survey: test-site
steps:
  - step: test-make-traces
    settings: { traces: 50, samples: 400, value: ${100 + i} }
  - step: test-wait
    settings: { ms: 400 }
  - step: test-scale
    settings: { factor: ${i + 2} }
`,
      ),
    );
    const results = await Promise.all(files.map((f, i) => tsxChild("run-pipeline.ts", [f, `writer-${i}`])));
    for (const r of results) {
      expect(r.exitCode, r.stderr).toBe(0);
      expect(JSON.parse(r.stdout).status).toBe("succeeded");
    }
    for (let i = 0; i < 3; i++) {
      const rows = listRuns(db, { pipelineName: `engine-parallel-${i}` }).rows;
      expect(rows).toHaveLength(1);
      expect(rows[0].status).toBe("succeeded");
      expect(rows[0].startedByLabel).toBe(`writer-${i}`);
      const detail = getRun(db, rows[0].id)!;
      const set = readArtifactSync(detail.steps[2].outputs.gathers) as GatherSet;
      expect(set.gathers[0].data[0]).toBe((100 + i) * (i + 2));
    }
    expect(db.$client.pragma("integrity_check", { simple: true })).toBe("ok");
  });
});
