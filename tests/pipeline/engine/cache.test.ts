/**
 * Cache keys stay what they were: the keys below were computed by the engine before the runner
 * was split into modules (commit 9a4de86) for this exact pipeline. A change of the key formula,
 * of canonical JSON or of the artifact encoding would make every earlier result unreachable, so
 * these values are pinned on purpose. The formula itself is written out in pipeline/cache.ts.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../../db/client";
import { getRun } from "../../../db/queries/runs";
import { stepCacheKey } from "../../../pipeline/cache";
import { parsePipelineText } from "../../../pipeline/pipeline-file";
import { createRun, executeRun } from "../../../pipeline/runner";
import { registerEngineTestSteps } from "../../helpers/engine-steps";

let tmp: string;
let db: Db;

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-cache-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  registerEngineTestSteps();
  db = getDb();
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("cache keys", () => {
  it("are the keys the engine computed before the runner split, for a pipeline written as before", async () => {
    const file = path.join(tmp, "pin.yaml");
    fs.writeFileSync(
      file,
      `name: cache-key-pin
survey: test-site
steps:
  - step: test-make-traces
    settings: { traces: 4, samples: 16, value: 1 }
  - step: test-scale
    label: first-scale
    settings: { factor: 3 }
  - step: test-scale
    label: second-scale
`,
    );
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor: { userId: null, label: "tester", door: "cli" } });
    expect((await executeRun(db, runId)).status).toBe("succeeded");
    const steps = getRun(db, runId)!.steps;
    expect(steps.map((s) => [s.label, s.cacheKey, s.outputs.gathers])).toEqual([
      ["test-make-traces", "0718eb7d6c6f0d305a32fd49721395314434e7c827809a7ae7e09f9bb6ca1901", "e08a4ad37e1da5a39344a713362a8694368ad5bc621b5bd641354920cd991fa1"],
      ["first-scale", "825e29e653345872eebf318555955accc3cf239a98a91e6235ccc2164e5e9f7d", "001349a503ea68e2e6f37e4b81c5dbaac391549897a3d90b6a619254d3b79f80"],
      ["second-scale", "da2f5ce6986d4bca68306c5f21ef4e31bbbb30cae3885bcf08bb2497545413a1", "2b0c4f90c5ac05b3d978d9b342b813d018bca2263ad06748ef607f8435f1f092"],
    ]);
  });

  it("stepCacheKey is the formula the runner uses", () => {
    expect(stepCacheKey({ id: "test-make-traces", version: 1 }, { traces: 4, samples: 16, value: 1 }, {})).toBe(
      "0718eb7d6c6f0d305a32fd49721395314434e7c827809a7ae7e09f9bb6ca1901",
    );
  });

  it("a file without onBadFile resolves as before (stop, from the import step's default), so its version hash is unchanged", () => {
    const text = "name: bad-file-default\nsurvey: test-site\nfieldData: ./f\nsteps:\n  - step: import-records\n";
    const resolved = parsePipelineText(text, "p.yaml", tmp);
    expect(resolved.onBadFile).toBe("stop");
    expect(resolved.steps[0].params.onBadFile).toBe("stop");
    const skip = parsePipelineText(text.replace("steps:", "onBadFile: skip\nsteps:"), "p.yaml", tmp);
    expect([skip.onBadFile, skip.steps[0].params.onBadFile]).toEqual(["skip", "skip"]);
  });
});
