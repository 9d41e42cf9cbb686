/**
 * Long steps that report along the way: intermediate results visible while the step runs, live
 * series, and checkpoints a resumed run continues from after the process was killed (kill -9).
 * Behaviours of our own design, checked against their specification in DEVELOPERS.md ("Steps
 * that report along the way"); the arithmetic of the test step (x <- 1.5 x + 1) is checked
 * against its closed form x_n = 1.5^n (x_0 + 2) - 2.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { execa } from "execa";
import { eq } from "drizzle-orm";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../../db/client";
import { artifacts, runs } from "../../../db/schema";
import { listIntermediates } from "../../../db/queries/intermediates";
import { getRun } from "../../../db/queries/runs";
import { readArtifactSync } from "../../../pipeline/artifact-store";
import { createRun, executeRun, markInterruptedRuns, prepareResume } from "../../../pipeline/runner";
import { calls, registerEngineTestSteps } from "../../helpers/engine-steps";
import type { JsonDocument } from "../../../pipeline/types";

const actor = { userId: null, label: "tester", door: "cli" as const };
let tmp: string;
let db: Db;

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-records-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  registerEngineTestSteps();
  db = getDb();
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

const bin = path.join(process.cwd(), "bin", "tracewright.mjs");
const tw = (args: string[]) => execa(process.execPath, [bin, ...args], { env: { ...process.env, TRACEWRIGHT_DATA_DIR: tmp }, reject: false });

function pipeline(name: string, iterateSettings: Record<string, unknown>): string {
  const file = path.join(tmp, `${name}.yaml`);
  fs.writeFileSync(
    file,
    `name: ${name}
survey: test-site
steps:
  - step: test-make-traces
    settings: { value: 2 }
  - step: test-iterate
    label: invert
    settings: ${JSON.stringify(iterateSettings)}
`,
  );
  return file;
}

/** Waits until `done()` holds, checking every 50 ms (an event from another process, not a timed sleep). */
async function until(done: () => boolean, what: string, limitMs = 60_000): Promise<void> {
  const deadline = Date.now() + limitMs;
  while (!done()) {
    if (Date.now() > deadline) throw new Error(`gave up waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 50));
  }
}

type ShowJson = {
  status: string;
  steps: Array<{ label: string; status: string; intermediates: Array<{ kind: string; index: number; label: string | null; hash: string }> }>;
};

describe("a step that records intermediate results and checkpoints", () => {
  it("shows its results while running and, after kill -9, resumes from its last checkpoint to the same outputs", async () => {
    const flag = path.join(tmp, "holding.flag");
    const release = path.join(tmp, "release.flag");
    const file = pipeline("iterate-killed", { iterations: 10, holdAfter: 5, startedFlagFile: flag, releaseFile: release });
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    const child = execa(process.execPath, ["--import", "tsx", path.join(process.cwd(), "tests/fixtures/engine/execute-run.ts"), String(runId)], {
      env: { ...process.env, TRACEWRIGHT_DATA_DIR: tmp },
      reject: false,
    });
    await until(() => fs.existsSync(flag), "the step to finish iteration 6");

    // While it runs: `tracewright show` lists the six recorded iterations, in text and JSON.
    const shown = await tw(["show", String(runId), "--json"]);
    expect(shown.exitCode).toBe(0);
    const live = JSON.parse(shown.stdout) as ShowJson;
    expect(live.status).toBe("running");
    const invertLive = live.steps.find((s) => s.label === "invert")!;
    expect(invertLive.status).toBe("running");
    expect(invertLive.intermediates.map((x) => [x.kind, x.index, x.label])).toEqual(
      Array.from({ length: 6 }, (_, i) => ["model", i, `iteration ${i + 1}`]),
    );
    const text = await tw(["show", String(runId)]);
    expect(text.stdout).toContain(`along model        #5     ${invertLive.intermediates[5].hash}  iteration 6`);
    // The misfit curve is written while the step runs.
    const liveSeries = getRun(db, runId)!.steps[1].series;
    expect(liveSeries.find((s) => s.name === "misfit")!.points.map((p) => p.x)).toEqual([0, 1, 2, 3, 4, 5]);

    child.kill("SIGKILL");
    await child;
    expect(markInterruptedRuns(db)).toContain(runId);
    for (const k of Object.keys(calls)) delete calls[k];
    prepareResume(db, runId, actor);
    const outcome = await executeRun(db, runId);
    expect(outcome.status).toBe("succeeded");
    // Iterations 1-6 were finished before the kill: only 7-10 ran again.
    expect(calls["test-iterate:iteration"]).toBe(4);

    const resumed = getRun(db, runId)!;
    const invert = resumed.steps[1];
    const records = listIntermediates(db, invert.id);
    expect(records.map((x) => x.index)).toEqual([0, 1, 2, 3, 4, 5, 6, 7, 8, 9]);
    // Closed form of x <- 1.5 x + 1 from x0 = 2: x_n = 1.5^n * 4 - 2 (n = iteration + 1).
    for (const r of records) {
      const v = readArtifactSync(r.artifactHash) as { kind: string; values: Float64Array };
      expect(v.values[0]).toBeCloseTo(1.5 ** (r.index + 1) * 4 - 2, 9);
      expect(r.meta).toEqual({ misfit: 1 / (r.index + 1) });
    }
    // Intermediates are registered artifacts produced by the step.
    const registered = db.select().from(artifacts).where(eq(artifacts.hash, records[9].artifactHash)).get()!;
    expect(registered.producedByRunStepId).toBe(invert.id);
    expect(invert.series.find((s) => s.name === "misfit")!.points.map((p) => p.x)).toEqual([0, 1, 2, 3, 4, 5, 6, 7, 8, 9]);

    // An uninterrupted run of the same computation ends with the same outputs and intermediates.
    const plain = createRun(db, { source: "pipeline-file", pipelinePath: pipeline("iterate-plain", { iterations: 10 }), actor });
    expect((await executeRun(db, plain.runId)).status).toBe("succeeded");
    const plainStep = getRun(db, plain.runId)!.steps[1];
    expect(plainStep.outputs.report).toBe(invert.outputs.report);
    expect(listIntermediates(db, plainStep.id).map((x) => x.artifactHash)).toEqual(records.map((x) => x.artifactHash));
    const report = readArtifactSync(invert.outputs.report) as JsonDocument;
    expect((report.data as number[])[0]).toBeCloseTo(1.5 ** 10 * 4 - 2, 6);

    // Shown after the end too; the run is no longer running.
    const after = JSON.parse((await tw(["show", String(runId), "--json"])).stdout) as ShowJson;
    expect(after.steps[1].intermediates).toHaveLength(10);
    expect(db.select().from(runs).where(eq(runs.id, runId)).get()!.status).toBe("succeeded");
  }, 120_000);

  it("a cache hit lists the intermediate results of the step that computed it", async () => {
    const file = pipeline("iterate-cached", { iterations: 3 });
    const first = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    await executeRun(db, first.runId);
    const second = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    for (const k of Object.keys(calls)) delete calls[k];
    await executeRun(db, second.runId);
    expect(calls["test-iterate"]).toBeUndefined();
    const a = getRun(db, first.runId)!.steps[1];
    const b = getRun(db, second.runId)!.steps[1];
    expect(b.cacheHit).toBe(true);
    expect(listIntermediates(db, b.id)).toEqual(listIntermediates(db, a.id));
    expect(listIntermediates(db, b.id)).toHaveLength(3);
  });
});
