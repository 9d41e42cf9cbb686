/**
 * The pipeline editor's engine side (pipeline/pipeline-edit.ts): its YAML reads back through the
 * command line's own parser (pipeline-file.ts) to the same validated pipeline for every example
 * pipeline; its field errors are the command line's; the differences between versions; saving
 * makes a new version with an audit event. The reference is the YAML 1.2 text round trip and our
 * own pipeline-file format (DEVELOPERS.md, "The path of one setting"); no outside numbers here.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb } from "../../db/client";
import { listAudit } from "../../db/queries/audit";
import { getPipelineVersion, listPipelines, listVersionsOfPipeline } from "../../db/queries/pipelines";
import { canonicalJson } from "../../pipeline/artifact-codec";
import { AppError } from "../../pipeline/errors";
import { loadPipelineFile, parsePipelineText, type ResolvedPipeline } from "../../pipeline/pipeline-file";
import {
  describeDifference,
  diffPipelines,
  editFieldError,
  editFieldErrors,
  editorModel,
  PipelineProblems,
  pipelineYaml,
  savePipelineEdit,
  validateEditedPipeline,
  valueChanges,
} from "../../pipeline/pipeline-edit";
import { createRun } from "../../pipeline/run-create";
import { catchError } from "../helpers/catch-error";

const examples = path.resolve(__dirname, "../../examples/quillmoor");
const exampleFiles = fs.readdirSync(examples).filter((f) => f.endsWith(".yaml")).sort();
const processingFile = path.join(examples, "qm1-processing.yaml");

describe("YAML → parse → editor model → YAML → parse", () => {
  it("finds the example pipelines", () => {
    expect(exampleFiles.length).toBeGreaterThanOrEqual(4);
  });
  for (const file of exampleFiles) {
    it(`${file}: the same canonical pipeline, settings included, read from another folder`, () => {
      const first = loadPipelineFile(path.join(examples, file)).resolved;
      const yaml = pipelineYaml(editorModel(first));
      // Another folder: the editor's YAML names its paths absolutely, so it reads the same anywhere.
      const second = parsePipelineText(yaml, "edited.yaml", os.tmpdir());
      expect(canonicalJson(second)).toBe(canonicalJson(first));
      for (let i = 0; i < first.steps.length; i++) expect(canonicalJson(second.steps[i].params)).toBe(canonicalJson(first.steps[i].params));
      // And the text is a fixed point: writing the read-back pipeline gives the same text.
      expect(pipelineYaml(editorModel(second))).toBe(yaml);
    });
  }
});

describe("validation is the command line's", () => {
  it("a bad band-pass corner: the same message as the pipeline file with that value, naming the field", () => {
    const resolved = loadPipelineFile(processingFile).resolved;
    const model = editorModel(resolved);
    const i = model.steps.findIndex((s) => s.step === "frequency-filter");
    model.steps[i].settings = { ...model.steps[i].settings, lowCutHz: -4 };
    const err = catchError(() => validateEditedPipeline(model));
    expect(err).toBeInstanceOf(AppError);
    const fieldError = editFieldError(err)!;
    expect(fieldError.field).toBe(`steps[${i}].settings.lowCutHz`);
    // The command line reading a file with the same content says the same (line numbers of that text).
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), "tw-edit-"));
    const file = path.join(dir, editorModel(resolved).name + ".yaml");
    fs.writeFileSync(file, pipelineYaml(model));
    const cliErr = catchError(() => loadPipelineFile(file)) as AppError;
    fs.rmSync(dir, { recursive: true, force: true });
    expect(cliErr.message).toBe((err as AppError).message);
    expect(fieldError.message).toMatch(/line \d+, steps\[\d+\]\.settings\.lowCutHz: /);
    expect(fieldError.problem.length).toBeGreaterThan(0);
    expect(fieldError.message.endsWith(fieldError.problem)).toBe(true);
  });

  it("an unknown step and a repeated label are refused with the field named", () => {
    const model = editorModel(loadPipelineFile(processingFile).resolved);
    const unknown = { ...model, steps: [...model.steps, { step: "no-such-step", label: "no-such-step", settings: {} }] };
    expect(editFieldError(catchError(() => validateEditedPipeline(unknown)))!.field).toBe(`steps[${model.steps.length}].step`);
    const twice = { ...model, steps: [...model.steps, { ...model.steps.at(-1)! }] };
    expect(editFieldError(catchError(() => validateEditedPipeline(twice)))!.problem).toMatch(/used twice/);
  });
});

describe("every problem at once", () => {
  /** What the command line says of a pipeline file holding `model`'s text. */
  const cliMessage = (model: ReturnType<typeof editorModel>) => {
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), "tw-edit-"));
    const file = path.join(dir, `${model.name}.yaml`);
    fs.writeFileSync(file, pipelineYaml(model));
    const err = catchError(() => loadPipelineFile(file)) as AppError;
    fs.rmSync(dir, { recursive: true, force: true });
    return err.message;
  };

  it("finds the problems of several steps and several settings of one step, each as the command line words it alone", () => {
    const base = editorModel(loadPipelineFile(processingFile).resolved);
    const at = (id: string) => base.steps.findIndex((s) => s.step === id);
    const [win, filter] = [at("time-window"), at("frequency-filter")];
    // Each change alone, and all together.
    const edits: Array<(m: typeof base) => void> = [
      (m) => (m.steps[win].settings = { ...m.steps[win].settings, startMs: 0, endMs: -5 }),
      (m) => (m.steps[filter].settings = { ...m.steps[filter].settings, lowCutHz: -4 }),
      (m) => (m.steps[filter].settings = { ...m.steps[filter].settings, order: "four" }),
      (m) => m.steps.push({ step: "no-such-step", label: "no-such-step", settings: {} }),
    ];
    const all = structuredClone(base);
    for (const e of edits) e(all);
    const err = catchError(() => validateEditedPipeline(all));
    expect(err).toBeInstanceOf(PipelineProblems);
    const problems = (err as PipelineProblems).problems;
    expect(problems.map((p) => p.details.field)).toEqual([`steps[${win}].settings.endMs`, `steps[${filter}].settings.lowCutHz`, `steps[${filter}].settings.order`, `steps[${base.steps.length}].step`]);
    // The settings of one step: every issue of its schema. Across steps: each message is the one
    // the command line prints for a file with that problem only (same lines: only values differ).
    for (const [k, e] of edits.entries()) {
      const alone = structuredClone(base);
      e(alone);
      expect(problems[k].message).toBe(cliMessage(alone));
    }
    expect((err as PipelineProblems).message).toBe(`${problems[0].message} (and 3 more problems)`);
    expect(editFieldErrors(err).map((f) => f.field)).toEqual(problems.map((p) => p.details.field));
    // One problem stays the command line's error itself.
    const one = structuredClone(base);
    edits[0](one);
    const single = catchError(() => validateEditedPipeline(one));
    expect(single).not.toBeInstanceOf(PipelineProblems);
    expect((single as AppError).message).toBe(cliMessage(one));
  });

  it("does not blame later steps for the slots of a step with a bad setting", () => {
    const model = editorModel(loadPipelineFile(processingFile).resolved);
    model.steps[0].settings = { ...model.steps[0].settings, onBadFile: "shrug" };
    const err = catchError(() => validateEditedPipeline(model));
    expect(err).not.toBeInstanceOf(PipelineProblems);
    expect(editFieldErrors(err).map((f) => f.field)).toEqual(["steps[0].settings.onBadFile"]);
  });
});

describe("differences between versions", () => {
  const base = loadPipelineFile(processingFile).resolved;
  const labels = base.steps.map((s) => s.label);

  it("a changed corner, a moved, a removed and an added step", () => {
    const model = editorModel(base);
    const filter = model.steps.find((s) => s.step === "frequency-filter")!;
    filter.settings = { ...filter.settings, highCutHz: 80 };
    // Move gain from the end to before time-window, remove spectra, add a second gain at the end.
    const gainAt = model.steps.findIndex((s) => s.step === "gain");
    const [gain] = model.steps.splice(gainAt, 1);
    model.steps.splice(model.steps.findIndex((s) => s.step === "time-window"), 0, gain);
    model.steps = model.steps.filter((s) => s.step !== "spectra");
    model.steps.push({ step: "gain", label: "final-gain", settings: { kind: "agc" } });
    const after = validateEditedPipeline(model).resolved;
    const d = diffPipelines(base, after);
    const byLabel = Object.fromEntries(d.steps.map((s) => [s.label, s]));
    expect(byLabel["frequency-filter"].status).toBe("changed");
    expect(byLabel["frequency-filter"].changes).toEqual([{ path: "highCutHz", before: 90, after: 80 }]);
    expect(byLabel.spectra.status).toBe("removed");
    expect(byLabel["final-gain"].status).toBe("added");
    expect(byLabel["final-gain"].positionAfter).toBe(after.steps.length);
    // Only one step moved: the others kept their relative order.
    expect(d.steps.filter((s) => s.moved).map((s) => s.label)).toEqual(["gain"]);
    expect(d.steps.filter((s) => s.status === "same").length).toBe(labels.length - 2);
    // Removed steps stand where they were: spectra after frequency-filter.
    const order = d.steps.map((s) => s.label);
    expect(order.indexOf("spectra")).toBe(order.indexOf("frequency-filter") + 1);
    const lines = describeDifference(d);
    expect(lines).toContain("frequency-filter.highCutHz: 90 → 80");
    expect(lines).toContain("removed step spectra (spectra)");
    expect(lines.some((l) => l.startsWith("moved step gain from "))).toBe(true);
    expect(lines.some((l) => l.startsWith("added step final-gain (gain)"))).toBe(true);
  });

  it("nested settings: object keys and list items by path; lists of another length whole", () => {
    expect(valueChanges({ a: { b: 1, c: [1, 2] } }, { a: { b: 2, c: [1, 3] } })).toEqual([
      { path: "a.b", before: 1, after: 2 },
      { path: "a.c[1]", before: 2, after: 3 },
    ]);
    expect(valueChanges({ s: [{ x: 1 }] }, { s: [{ x: 1 }, { x: 2 }] })).toEqual([{ path: "s", before: [{ x: 1 }], after: [{ x: 1 }, { x: 2 }] }]);
    expect(valueChanges({ k: 1 }, {})).toEqual([{ path: "k", before: 1 }]);
  });

  it("identical versions: nothing", () => {
    const d = diffPipelines(base, JSON.parse(JSON.stringify(base)) as ResolvedPipeline);
    expect(d.pipeline).toEqual([]);
    expect(d.steps.every((s) => s.status === "same" && !s.moved)).toBe(true);
  });
});

describe("saving an edit", () => {
  let tmp: string;
  beforeAll(() => {
    tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-pedit-"));
    process.env.TRACEWRIGHT_DATA_DIR = tmp;
    delete process.env.TRACEWRIGHT_DB;
  });
  afterAll(() => {
    closeDb();
    fs.rmSync(tmp, { recursive: true, force: true });
  });

  it("makes a new version with the audit event; unchanged keeps it; a stale base is refused", () => {
    const db = getDb();
    const dir = fs.mkdtempSync(path.join(tmp, "p-"));
    const file = path.join(dir, "edit-check.yaml");
    fs.writeFileSync(file, "name: edit-check\nsurvey: edit-site\nsteps:\n  - step: build-model\n");
    const actor = { userId: null, label: "tester", door: "cli" as const };
    const reg = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    const v1 = getPipelineVersion(db, reg.pipelineVersionId)!.version;
    const model = editorModel(JSON.parse(v1.definitionJson) as ResolvedPipeline);
    const build = model.steps[0];
    const spacing = (build.settings.grid as { spacingM: number }).spacingM;
    // Keys in another order than the schema's, as a form may send them.
    build.settings = Object.fromEntries(Object.entries({ ...build.settings, grid: { ...(build.settings.grid as object), spacingM: spacing * 2 } }).reverse());
    const webActor = { userId: null, label: "Editor Person", door: "web" as const };
    const saved = savePipelineEdit(db, { pipelineId: v1.pipelineId, baseVersionId: v1.id, edit: { description: "changed", onBadFile: model.onBadFile, steps: model.steps }, actor: webActor });
    expect(saved.created).toBe(true);
    expect(saved.version).toBe(2);
    const versions = listVersionsOfPipeline(db, v1.pipelineId);
    expect(versions.map((v) => v.version)).toEqual([2, 1]);
    // Never an overwrite: version 1 is as it was.
    expect(versions[1].definitionJson).toBe(v1.definitionJson);
    expect(versions[0].sourceText).toBe(saved.yaml);
    // What is recorded is the canonical file of the version (what the pipeline page shows and offers).
    expect(saved.yaml).toBe(pipelineYaml(editorModel(JSON.parse(versions[0].definitionJson) as ResolvedPipeline)));
    expect(versions[0].createdByLabel).toBe("Editor Person");
    const event = listAudit(db, { action: "pipeline.version", entityId: "edit-check" }).find((e) => e.actorLabel === "Editor Person");
    expect(event).toBeTruthy();
    const afterJson = JSON.parse((event as { afterJson: string }).afterJson) as { version: number; changes: string[] };
    expect(afterJson.version).toBe(2);
    expect(afterJson.changes).toContain(`build-model.grid.spacingM: ${spacing} → ${spacing * 2}`);
    expect(afterJson.changes).toContain('description: "" → "changed"');

    const listed = listPipelines(db).find((p) => p.name === "edit-check")!;
    expect(listed).toMatchObject({ versions: 2, latestVersion: 2, latestBy: "Editor Person", surveySlug: "edit-site" });

    const again = savePipelineEdit(db, { pipelineId: v1.pipelineId, baseVersionId: versions[0].id, edit: { description: "changed", onBadFile: model.onBadFile, steps: model.steps }, actor: webActor });
    expect(again.created).toBe(false);
    expect(again.version).toBe(2);

    const stale = catchError(() => savePipelineEdit(db, { pipelineId: v1.pipelineId, baseVersionId: v1.id, edit: { description: "other", onBadFile: model.onBadFile, steps: model.steps }, actor: webActor }));
    expect((stale as AppError).code).toBe("conflict");
    expect(listVersionsOfPipeline(db, v1.pipelineId).length).toBe(2);
  });
});
