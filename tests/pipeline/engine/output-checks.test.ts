/**
 * No step emits NaN or infinite samples: the runner refuses such a gathers output where it first
 * appears, naming step, gather and trace, and writes no artifact for it. (IEEE 754 defines NaN
 * and the infinities as the non-finite values; Number.isFinite is false exactly for them.)
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { eq } from "drizzle-orm";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../../db/client";
import { artifacts } from "../../../db/schema";
import { getRun } from "../../../db/queries/runs";
import { findNonFiniteSample } from "../../../pipeline/output-checks";
import { createRun, executeRun } from "../../../pipeline/runner";
import { registerEngineTestSteps } from "../../helpers/engine-steps";
import type { GatherSet } from "../../../pipeline/types";

let tmp: string;
let db: Db;

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-checks-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  registerEngineTestSteps();
  db = getDb();
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

async function runPoisoned(name: string, settings: string) {
  const file = path.join(tmp, `${name}.yaml`);
  fs.writeFileSync(
    file,
    `name: ${name}
survey: test-site
steps:
  - step: test-make-traces
    settings: { traces: 4, samples: 8, value: 1 }
  - step: test-poison
    label: faulty
    settings: ${settings}
  - step: test-scale
`,
  );
  const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor: { userId: null, label: "tester", door: "cli" } });
  return { outcome: await executeRun(db, runId), run: getRun(db, runId)! };
}

describe("non-finite samples in a step's gathers", () => {
  it("fail the step with a message naming step, gather, trace and sample, and write nothing for it", async () => {
    const { outcome, run } = await runPoisoned("nan-check", "{ trace: 2, sample: 5, what: nan }");
    expect(outcome.status).toBe("failed");
    expect(outcome.error).toBe(
      "faulty: wrote NaN in gathers: gather g1, trace 3 (channel 3, file test), sample 6; 1 non-finite sample(s) in that gather from there on. No step may emit NaN or infinite samples.",
    );
    expect(run.steps.map((s) => s.status)).toEqual(["succeeded", "failed", "skipped"]);
    expect(run.steps[1].outputs).toEqual({});
    expect(db.select().from(artifacts).where(eq(artifacts.producedByRunStepId, run.steps[1].id)).all()).toEqual([]);
  });

  it("infinities are refused the same way", async () => {
    const { outcome } = await runPoisoned("inf-check", "{ trace: 0, sample: 0, what: infinity }");
    expect(outcome.error).toMatch(/^faulty: wrote -Infinity in gathers: gather g1, trace 1 \(channel 1, file test\), sample 1;/);
  });

  it("findNonFiniteSample finds the first one and counts the rest; finite data passes", () => {
    const gather = (data: number[]) => ({
      id: "a",
      sampleIntervalS: 0.001,
      sampleCount: 3,
      startTimeS: 0,
      traces: [],
      data: Float32Array.from(data),
    });
    const set = { kind: "gathers", gathers: [gather([0, 1, 2, 3, 4, 5]), gather([1, NaN, 2, Infinity, 0, NaN])] } as unknown as GatherSet;
    expect(findNonFiniteSample(set)).toEqual({ gatherId: "a", traceIndex: 0, sampleIndex: 1, value: NaN, count: 3 });
    // Float32 overflow becomes Infinity (IEEE 754 round-to-nearest): 3.5e38 is above the largest float32 (about 3.4028e38).
    expect(findNonFiniteSample({ kind: "gathers", gathers: [gather([0, 0, 0, 0, 3.5e38, 0])] } as unknown as GatherSet)).toMatchObject({
      traceIndex: 1,
      sampleIndex: 1,
      value: Infinity,
    });
    expect(findNonFiniteSample({ kind: "gathers", gathers: [gather([0, -1e30, 1e30, 0, 0, 0])] } as unknown as GatherSet)).toBeNull();
  });
});
