/**
 * Pipeline-file validation: every error names the file, the line and the field, and says
 * what was expected; unknown steps and settings list the valid ones. (Our own format; the
 * line numbers are checked against the YAML text written here.)
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { beforeAll, describe, expect, it } from "vitest";
import { mergeSettings, parsePipelineText } from "../../../pipeline/pipeline-file";
import { AppError } from "../../../pipeline/errors";
import { registerEngineTestSteps } from "../../helpers/engine-steps";

beforeAll(() => registerEngineTestSteps());

function errorOf(text: string, baseDir = "/tmp"): AppError {
  try {
    parsePipelineText(text, "qm1.yaml", baseDir);
  } catch (err) {
    expect(err).toBeInstanceOf(AppError);
    return err as AppError;
  }
  throw new Error("expected a validation error");
}

const good = `name: check
survey: site-a
steps:
  - step: test-make-traces
    settings:
      traces: 4
  - step: test-scale
    settings: { factor: 3 }
`;

describe("pipeline files", () => {
  it("resolves a good file with defaults filled in", () => {
    const p = parsePipelineText(good, "qm1.yaml", "/data/proj");
    expect(p.steps).toEqual([
      { label: "test-make-traces", stepId: "test-make-traces", version: 1, params: { traces: 4, samples: 8, value: 1 } },
      { label: "test-scale", stepId: "test-scale", version: 1, params: { factor: 3 } },
    ]);
    expect(p.onBadFile).toBe("stop");
  });

  it("names the line of an unknown step and lists the valid ones", () => {
    const e = errorOf(good.replace("step: test-scale", "step: test-scael"));
    expect(e.details.line).toBe(7);
    expect(e.message).toMatch(/^qm1\.yaml line 7, steps\[1\]\.step: unknown step "test-scael"; valid steps: .*test-scale/);
    expect(e.details.choices).toContain("test-scale");
  });

  it("names the line of an unknown setting and lists the valid ones", () => {
    const e = errorOf(good.replace("      traces: 4", "      traces: 4\n      tracs: 5"));
    expect(e.details.line).toBe(7);
    expect(e.message).toMatch(/steps\[0\]\.settings\.tracs: unknown setting "tracs" for step test-make-traces; valid settings: traces, samples, value/);
  });

  it("names the line and field of a bad value and what was expected", () => {
    const e = errorOf(good.replace("traces: 4", "traces: -4"));
    expect(e.details.line).toBe(6);
    expect(e.details.field).toBe("steps[0].settings.traces");
    expect(e.message).toMatch(/qm1\.yaml line 6, steps\[0\]\.settings\.traces: .*(>0|positive|greater)/i);
  });

  it("reports YAML syntax errors with their line", () => {
    const e = errorOf("name: check\nsurvey: site-a\nsteps:\n  - step: [unclosed\n");
    expect(e.details.line).toBeGreaterThanOrEqual(4);
    expect(e.message).toMatch(/not valid YAML/);
  });

  it("reports unknown top-level keys with the valid ones", () => {
    const e = errorOf(good.replace("survey: site-a", "survey: site-a\nfeild_data: ./x"));
    expect(e.details.line).toBe(3);
    expect(e.message).toMatch(/unknown key "feild_data"; valid keys: name, description, survey/);
  });

  it("refuses a step whose input nothing provides", () => {
    const e = errorOf("name: check\nsurvey: site-a\nsteps:\n  - step: test-scale\n");
    expect(e.details.line).toBe(4);
    expect(e.message).toMatch(/needs "gathers", which nothing before it provides/);
  });

  it("refuses duplicate labels", () => {
    const e = errorOf(good.replace("  - step: test-scale", "  - step: test-scale\n  - step: test-scale").replace("settings: { factor: 3 }", ""));
    expect(e.message).toMatch(/label "test-scale" is used twice/);
  });

  it("requires the top-level fields", () => {
    const e = errorOf("survey: site-a\nsteps:\n  - step: test-make-traces\n");
    expect(e.details.field).toBe("name");
  });

  it("merges overrides of settings that hold objects key by key; replaces lists and values", () => {
    const base = { grid: { depthM: 20, spacingM: 0.25, spreadMarginM: 6 }, layers: [1, 2], order: 4 };
    expect(mergeSettings(base, { grid: { depthM: 30 }, layers: [3], order: 2 })).toEqual({
      grid: { depthM: 30, spacingM: 0.25, spreadMarginM: 6 },
      layers: [3],
      order: 2,
    });
    expect(base.grid.depthM).toBe(20);
  });
});

describe("settings taken from files", () => {
  it("replaces { fromFile } by the file's text, relative to the pipeline file, and names the line when it is missing", () => {
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), "tw-fromfile-"));
    fs.writeFileSync(path.join(dir, "label.txt"), "from a file");
    const text = (name: string) => `name: check\nsurvey: site-a\nsteps:\n  - step: test-make-traces\n  - step: test-read-label\n    settings:\n      label: { fromFile: ./${name} }\n`;
    const p = parsePipelineText(text("label.txt"), "qm1.yaml", dir);
    expect(p.steps[1].params).toEqual({ label: "from a file" });
    const e = errorOf(text("missing.txt"), dir);
    expect(e.details.line).toBe(7);
    expect(e.message).toMatch(/steps\[1\]\.settings\.label\.fromFile: the file \.\/missing\.txt cannot be read/);
    fs.rmSync(dir, { recursive: true, force: true });
  });
});
