/**
 * Explicit inputs: a pipeline step may name where a slot comes from (`input: { gathers:
 * frequency-filter#1 }` or a label); the default stays the latest value of the slot. Our own
 * format (DEVELOPERS.md, "Explicit inputs"); line numbers are checked against the YAML written
 * here, and the wiring against the artifact hashes the engine recorded.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { execa } from "execa";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../../db/client";
import { getRun } from "../../../db/queries/runs";
import { hasArtifact } from "../../../pipeline/artifact-store";
import { AppError } from "../../../pipeline/errors";
import { parsePipelineText } from "../../../pipeline/pipeline-file";
import { createRun, executeRun } from "../../../pipeline/runner";
import { registerEngineTestSteps } from "../../helpers/engine-steps";

let tmp: string;
let db: Db;

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-inputs-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  registerEngineTestSteps();
  db = getDb();
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

const head = `name: wiring
survey: test-site
steps:
  - step: test-make-traces
    settings: { traces: 4, samples: 256, value: 1 }
  - step: frequency-filter
    settings: { lowCutHz: 10, highCutHz: 100 }
  - step: test-scale
    settings: { factor: 3 }
`;

function errorOf(text: string): AppError {
  try {
    parsePipelineText(text, "wiring.yaml", tmp);
  } catch (err) {
    expect(err).toBeInstanceOf(AppError);
    return err as AppError;
  }
  throw new Error("expected a validation error");
}

describe("naming a step's input in the pipeline file", () => {
  it("resolves step-id#n, labels and a single earlier step id to labels; files without input: are read as before", () => {
    const byOccurrence = parsePipelineText(`${head}  - step: frequency-filter\n    label: second-filter\n    input: { gathers: frequency-filter#1 }\n`, "w.yaml", tmp);
    expect(byOccurrence.steps[3].inputs).toEqual({ gathers: "frequency-filter" });
    const byLabel = parsePipelineText(`${head}  - step: test-scale\n    label: again\n    input: { gathers: test-make-traces }\n`, "w.yaml", tmp);
    expect(byLabel.steps[3].inputs).toEqual({ gathers: "test-make-traces" });
    const plain = parsePipelineText(head, "w.yaml", tmp);
    expect(plain.steps.every((s) => !("inputs" in s))).toBe(true);
  });

  it("refuses a step id that occurs twice before, naming file, line and the choices", () => {
    const text = `${head}  - step: frequency-filter\n    label: second-filter\n  - step: test-scale\n    label: last\n    input: { gathers: frequency-filter }\n`;
    const e = errorOf(text);
    expect(e.details.line).toBe(14);
    expect(e.message).toMatch(/^wiring\.yaml line 14, steps\[4\]\.input\.gathers: "frequency-filter" is ambiguous/);
    expect(e.details.choices).toEqual(["frequency-filter#1", "frequency-filter#2"]);
  });

  it("refuses missing, later, non-reading and non-writing references with their line", () => {
    expect(errorOf(`${head}  - step: test-scale\n    label: x\n    input: { gathers: nothing-here }\n`).message).toMatch(
      /line 12, steps\[3\]\.input\.gathers: no earlier step is labelled "nothing-here"/,
    );
    expect(errorOf(`${head}  - step: test-scale\n    label: x\n    input: { gathers: frequency-filter#2 }\n`).message).toMatch(
      /line 12, steps\[3\]\.input\.gathers: "frequency-filter#2": the file has only 1 frequency-filter step/,
    );
    expect(
      errorOf(`${head}  - step: test-scale\n    label: x\n    input: { gathers: later }\n  - step: test-scale\n    label: later\n`).message,
    ).toMatch(/no earlier step is labelled "later"/);
    expect(errorOf(`${head}  - step: test-scale\n    label: x\n    input: { picks: test-make-traces }\n`).message).toMatch(
      /line 12, steps\[3\]\.input\.picks: step test-scale does not read "picks"; it reads: gathers/,
    );
    expect(errorOf(`${head}  - step: test-read-label\n    input: { gathers: test-make-traces#1 }\n  - step: test-scale\n    label: y\n    input: { gathers: test-read-label }\n`).message).toMatch(
      /line 14, steps\[4\]\.input\.gathers: test-read-label \(test-read-label\) does not write "gathers"; it writes: report/,
    );
  });
});

describe("two frequency-filter steps in one run", () => {
  it("keep both results, and the second reads the first one's output when the file says so", async () => {
    const file = path.join(tmp, "two-filters.yaml");
    fs.writeFileSync(
      file,
      `${head}  - step: frequency-filter
    label: second-filter
    settings: { lowCutHz: 20, highCutHz: 60 }
    input: { gathers: frequency-filter#1 }
  - step: frequency-filter
    label: third-filter
    settings: { lowCutHz: 20, highCutHz: 60 }
`,
    );
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor: { userId: null, label: "tester", door: "cli" } });
    expect((await executeRun(db, runId)).status).toBe("succeeded");
    const [, first, scaled, second, third] = getRun(db, runId)!.steps;
    // The second filter read the first filter's gathers, not the latest (the scaled ones).
    expect(second.inputs.gathers).toBe(first.outputs.gathers);
    expect(second.inputSources.gathers).toEqual({ from: "frequency-filter", explicit: true });
    // Without input: the latest value, as before (here the second filter's output).
    expect(third.inputs.gathers).toBe(second.outputs.gathers);
    expect(third.inputSources.gathers).toEqual({ from: "second-filter", explicit: false });
    expect(scaled.inputSources.gathers).toEqual({ from: "frequency-filter", explicit: false });
    // Both filters' results are kept and differ (other corners, other input).
    expect(first.outputs.gathers).not.toBe(second.outputs.gathers);
    for (const s of [first, second, third]) expect(hasArtifact(s.outputs.gathers)).toBe(true);

    const shown = await execa(process.execPath, [path.join(process.cwd(), "bin", "tracewright.mjs"), "show", String(runId)], {
      env: { ...process.env, TRACEWRIGHT_DATA_DIR: tmp },
      reject: false,
    });
    expect(shown.stdout).toContain(`in  gathers        ${first.outputs.gathers.slice(0, 16)}  from frequency-filter (named in the file)`);
    expect(shown.stdout).toContain(`in  gathers        ${second.outputs.gathers.slice(0, 16)}  from second-filter\n`);
  }, 60_000);
});
