/**
 * What a pipeline file may read besides itself: `fromFile` settings only from the pipeline file's
 * folder and below, after resolving symbolic links, refused with the line number otherwise; and
 * YAML aliases bounded (the "billion laughs" expansion, YAML 1.2 §3.2.2.2 anchors and aliases).
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { AppError } from "../../../pipeline/errors";
import { parsePipelineText, loadPipelineFile } from "../../../pipeline/pipeline-file";
import { registerEngineTestSteps } from "../../helpers/engine-steps";
import { catchError } from "../../helpers/catch-error";

let root: string;
let dir: string;
const text = (ref: string) => `name: check\nsurvey: site-a\nsteps:\n  - step: test-make-traces\n  - step: test-read-label\n    settings:\n      label: { fromFile: ${JSON.stringify(ref)} }\n`;
const errorOf = (t: string) => catchError<AppError>(() => parsePipelineText(t, "qm1.yaml", dir));

beforeAll(() => {
  registerEngineTestSteps();
  root = fs.mkdtempSync(path.join(os.tmpdir(), "tw-inputs-"));
  dir = path.join(root, "survey");
  fs.mkdirSync(path.join(dir, "models"), { recursive: true });
  fs.writeFileSync(path.join(dir, "models", "start.csv"), "x,z,vs\n");
  fs.writeFileSync(path.join(root, "secret.txt"), "not for the run log");
  fs.symlinkSync(path.join(root, "secret.txt"), path.join(dir, "link-out.txt"));
  fs.symlinkSync(path.join(dir, "models", "start.csv"), path.join(dir, "link-in.csv"));
});

afterAll(() => fs.rmSync(root, { recursive: true, force: true }));

describe("fromFile", () => {
  it("reads files in the folder and below, also through a link that stays inside", () => {
    expect(parsePipelineText(text("./models/start.csv"), "qm1.yaml", dir).steps[1].params).toEqual({ label: "x,z,vs\n" });
    expect(parsePipelineText(text("link-in.csv"), "qm1.yaml", dir).steps[1].params).toEqual({ label: "x,z,vs\n" });
  });

  for (const [what, ref] of [
    ["a parent folder", "../secret.txt"],
    ["an absolute path", "/etc/passwd"],
    ["a link pointing out of the folder", "link-out.txt"],
    ["a path that climbs back in", "models/../../secret.txt"],
  ] as const) {
    it(`refuses ${what}, naming line 7 and the field`, () => {
      const e = errorOf(text(ref));
      expect(e).toBeInstanceOf(AppError);
      expect(e.details.line).toBe(7);
      expect(e.message).toMatch(/qm1\.yaml line 7, steps\[1\]\.settings\.label\.fromFile: the file .* is outside the pipeline file's folder/);
      expect(e.message).not.toContain("root:");
    });
  }

  it("refuses a folder", () => {
    expect(errorOf(text("models")).message).toMatch(/is not a regular file/);
  });
});

describe("YAML aliases", () => {
  it("an alias bomb is a bad-input error naming the file (exit 2), not an unexpected error", () => {
    const lines = ['a: &a ["x","x","x","x","x","x","x","x","x"]'];
    for (let k = 1; k < 9; k++) {
      const prev = String.fromCharCode(96 + k);
      const cur = String.fromCharCode(97 + k);
      lines.push(`${cur}: &${cur} [${Array(9).fill(`*${prev}`).join(",")}]`);
    }
    const file = path.join(dir, "bomb.yaml");
    fs.writeFileSync(file, `${lines.join("\n")}\nname: bomb\nsurvey: s\nsteps: []\n`);
    const e = catchError<AppError>(() => loadPipelineFile(file));
    expect(e).toBeInstanceOf(AppError);
    expect(e.code).toBe("bad-input");
    expect(e.exitCode).toBe(2);
    expect(e.details.file).toBe("bomb.yaml");
    expect(e.message).toMatch(/^bomb\.yaml line 1: YAML aliases expand too far/);
  });
});
