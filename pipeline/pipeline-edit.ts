/**
 * Pipelines edited in the control room: the editor's model of a pipeline, its YAML (the pipeline
 * file the command line reads), validation through the very parser the command line uses for
 * pipeline files (pipeline-file.ts), the differences between two versions, and saving an edit
 * as a new version (never an overwrite).
 */
import os from "node:os";
import path from "node:path";
import { stringify } from "yaml";
import type { Db } from "../db/client";
import type { Actor } from "../db/queries/audit";
import { getPipeline, listVersionsOfPipeline, savePipelineVersion } from "../db/queries/pipelines";
import { ensureSurvey } from "../db/queries/surveys";
import { canonicalJson } from "./artifact-codec";
import { AppError, toAppError } from "./errors";
import { parsePipelineText, type ResolvedPipeline } from "./pipeline-file";
import { describeParams, listSteps } from "./registry";
import { pipelineContentHash } from "./run-create";

/** One step as the editor holds it: complete settings, its label, and the inputs the file names. */
export interface EditedStep {
  step: string;
  label: string;
  settings: Record<string, unknown>;
  /** { slot: label of an earlier step }, only when the pipeline names where a slot comes from. */
  input?: Record<string, string>;
}

/** A pipeline as the editor holds it. Paths are absolute (as recorded), so its YAML reads the same from any folder. */
export interface EditedPipeline {
  name: string;
  description: string;
  survey: string;
  profile: string | null;
  fieldData: string | null;
  geometryTable: string | null;
  onBadFile: "stop" | "skip";
  steps: EditedStep[];
}

/** The editor's model of a validated (recorded) pipeline. */
export function editorModel(resolved: ResolvedPipeline): EditedPipeline {
  return {
    name: resolved.name,
    description: resolved.description,
    survey: resolved.survey,
    profile: resolved.profile,
    fieldData: resolved.fieldDataPath,
    geometryTable: resolved.geometryTablePath,
    onBadFile: resolved.onBadFile,
    steps: resolved.steps.map((s) => ({ step: s.stepId, label: s.label, settings: s.params, ...(s.inputs ? { input: s.inputs } : {}) })),
  };
}

/**
 * The pipeline file of an editor model: complete settings of every step, a label only where it
 * differs from the step id, keys in the order a person writes them. Long texts (an inline model
 * grid) become YAML block scalars.
 */
export function pipelineYaml(model: EditedPipeline): string {
  const file: Record<string, unknown> = { name: model.name };
  if (model.description) file.description = model.description;
  file.survey = model.survey;
  if (model.profile) file.profile = model.profile;
  if (model.fieldData) file.fieldData = model.fieldData;
  if (model.geometryTable) file.geometryTable = model.geometryTable;
  file.onBadFile = model.onBadFile;
  file.steps = model.steps.map((s) => {
    const entry: Record<string, unknown> = { step: s.step };
    if (s.label !== s.step) entry.label = s.label;
    if (Object.keys(s.settings).length > 0) entry.settings = withoutUndefined(s.settings);
    if (s.input && Object.keys(s.input).length > 0) entry.input = s.input;
    return entry;
  });
  // lineWidth 0: no folding, so a long description or path stays one line as typed.
  return stringify(file, { lineWidth: 0, aliasDuplicateObjects: false });
}

function withoutUndefined(v: Record<string, unknown>): Record<string, unknown> {
  return JSON.parse(JSON.stringify(v)) as Record<string, unknown>;
}

/** The file name errors of an edited pipeline name (as the command line names the file it reads). */
export function editedFileLabel(model: Pick<EditedPipeline, "name">): string {
  return `${model.name}.yaml`;
}

/** Several problems of an edited pipeline, found in one check; `problems` in file order, the first one's code, message and field. */
export class PipelineProblems extends AppError {
  readonly problems: AppError[];
  constructor(problems: AppError[]) {
    const [first] = problems;
    super(first.code, `${first.message} (and ${problems.length - 1} more problem${problems.length === 2 ? "" : "s"})`, first.details);
    this.name = "PipelineProblems";
    this.problems = problems;
  }
}

/**
 * Validates an editor model the way the command line validates a pipeline file: its YAML through
 * parsePipelineText, which goes on after the first error to find the others. One problem is thrown
 * as the very AppError (file, line, field) the command line prints; several as
 * {@link PipelineProblems} holding each of them.
 */
export function validateEditedPipeline(model: EditedPipeline, baseDir: string = process.cwd()): { yaml: string; resolved: ResolvedPipeline } {
  const yaml = pipelineYaml(model);
  const problems: AppError[] = [];
  try {
    return { yaml, resolved: parsePipelineText(yaml, editedFileLabel(model), baseDir, { errors: problems }) };
  } catch (err) {
    if (problems.length > 1) throw new PipelineProblems(problems);
    throw err;
  }
}

/** A field error of an edited pipeline: the field as pipeline-file errors name it (`steps[4].settings.highCutHz`), the problem, the whole message. */
export interface EditFieldError {
  field: string;
  problem: string;
  message: string;
  line?: number;
}

/** The field error of a failed validation, or null when `err` names no field. */
export function editFieldError(err: unknown): EditFieldError | null {
  const e = toAppError(err);
  const field = e.details.field;
  if (!field) return null;
  const at = e.message.indexOf(`${field}: `);
  return { field, problem: at >= 0 ? e.message.slice(at + field.length + 2) : e.message, message: e.message, line: e.details.line };
}

/** Every field error of a failed validation (several for {@link PipelineProblems}), in file order; empty when none names a field. */
export function editFieldErrors(err: unknown): EditFieldError[] {
  const all = err instanceof PipelineProblems ? err.problems : [err];
  return all.map(editFieldError).filter((f): f is EditFieldError => f !== null);
}

// ---------------------------------------------------------------------------------------------
// Differences between two versions

/** A value that differs: `before` undefined when added, `after` undefined when removed. */
export interface ValueChange {
  path: string;
  before?: unknown;
  after?: unknown;
}

export interface StepDifference {
  label: string;
  stepId: string;
  status: "added" | "removed" | "changed" | "same";
  /** True when the step changed places relative to the steps both versions share. */
  moved: boolean;
  /** 1-based positions in each version (absent where the step is absent). */
  positionBefore?: number;
  positionAfter?: number;
  changes: ValueChange[];
}

export interface PipelineDifference {
  /** Pipeline-level fields (description, field data, geometry table, onBadFile). */
  pipeline: ValueChange[];
  /** Steps in the newer version's order, removed ones where they stood. */
  steps: StepDifference[];
}

const same = (a: unknown, b: unknown) => canonicalJson(a ?? null) === canonicalJson(b ?? null);

function isObject(v: unknown): v is Record<string, unknown> {
  return typeof v === "object" && v !== null && !Array.isArray(v);
}

/** Leaf differences of two setting values: objects key by key, lists of equal length item by item, anything else whole. */
export function valueChanges(before: unknown, after: unknown, at = ""): ValueChange[] {
  if (same(before, after)) return [];
  if (isObject(before) && isObject(after)) {
    const keys = [...new Set([...Object.keys(before), ...Object.keys(after)])];
    return keys.flatMap((k) => valueChanges(before[k], after[k], at ? `${at}.${k}` : k));
  }
  if (Array.isArray(before) && Array.isArray(after) && before.length === after.length) {
    return before.flatMap((b, i) => valueChanges(b, after[i], `${at}[${i}]`));
  }
  return [{ path: at, ...(before !== undefined ? { before } : {}), ...(after !== undefined ? { after } : {}) }];
}

/** Labels of the longest common subsequence of two label lists (the steps that kept their order). */
function keptInOrder(a: string[], b: string[]): Set<string> {
  const n = a.length;
  const m = b.length;
  const len: number[][] = Array.from({ length: n + 1 }, () => new Array<number>(m + 1).fill(0));
  for (let i = n - 1; i >= 0; i--) for (let j = m - 1; j >= 0; j--) len[i][j] = a[i] === b[j] ? len[i + 1][j + 1] + 1 : Math.max(len[i + 1][j], len[i][j + 1]);
  const out = new Set<string>();
  for (let i = 0, j = 0; i < n && j < m; ) {
    if (a[i] === b[j]) {
      out.add(a[i]);
      i++;
      j++;
    } else if (len[i + 1][j] >= len[i][j + 1]) i++;
    else j++;
  }
  return out;
}

/**
 * What changed from `before` to `after`: steps are matched by label (a label naming another step
 * id counts as removed and added); settings compared leaf by leaf; a step counts as moved when it
 * is not among the longest run of shared steps that kept their order.
 */
export function diffPipelines(before: ResolvedPipeline, after: ResolvedPipeline): PipelineDifference {
  const pipeline: ValueChange[] = [
    ...valueChanges(before.description, after.description, "description"),
    ...valueChanges(before.fieldDataPath, after.fieldDataPath, "fieldData"),
    ...valueChanges(before.geometryTablePath, after.geometryTablePath, "geometryTable"),
    ...valueChanges(before.onBadFile, after.onBadFile, "onBadFile"),
  ];
  const key = (s: { label: string; stepId: string }) => `${s.label}\u0000${s.stepId}`;
  const beforeKeys = before.steps.map(key);
  const afterKeys = after.steps.map(key);
  const shared = afterKeys.filter((k) => beforeKeys.includes(k));
  const kept = keptInOrder(
    beforeKeys.filter((k) => shared.includes(k)),
    shared,
  );
  const out: StepDifference[] = after.steps.map((s, i) => {
    const j = beforeKeys.indexOf(key(s));
    if (j < 0) return { label: s.label, stepId: s.stepId, status: "added", moved: false, positionAfter: i + 1, changes: [] };
    const old = before.steps[j];
    const changes = [
      ...(old.version !== s.version ? [{ path: "(step version)", before: old.version, after: s.version }] : []),
      ...valueChanges(old.params, s.params),
      ...valueChanges(old.inputs ?? {}, s.inputs ?? {}, "input"),
    ];
    return {
      label: s.label,
      stepId: s.stepId,
      status: changes.length > 0 ? "changed" : "same",
      moved: !kept.has(key(s)),
      positionBefore: j + 1,
      positionAfter: i + 1,
      changes,
    };
  });
  // Removed steps go after the step that preceded them in the older version.
  before.steps.forEach((s, j) => {
    if (afterKeys.includes(key(s))) return;
    const removed: StepDifference = { label: s.label, stepId: s.stepId, status: "removed", moved: false, positionBefore: j + 1, changes: [] };
    const prev = j > 0 ? out.findIndex((d) => d.label === before.steps[j - 1].label && d.stepId === before.steps[j - 1].stepId) : -1;
    out.splice(prev + 1, 0, removed);
  });
  return { pipeline, steps: out };
}

/** One line per difference, for the audit trail ("frequency-filter.highCutHz: 90 → 80", "added spectra", ...). */
export function describeDifference(d: PipelineDifference): string[] {
  const show = (v: unknown) => (v === undefined ? "(unset)" : typeof v === "string" && v.length > 60 ? `${JSON.stringify(v.slice(0, 57))}…` : JSON.stringify(v));
  const lines = d.pipeline.map((c) => `${c.path}: ${show(c.before)} → ${show(c.after)}`);
  for (const s of d.steps) {
    if (s.status === "added") lines.push(`added step ${s.label} (${s.stepId}) at ${s.positionAfter}`);
    else if (s.status === "removed") lines.push(`removed step ${s.label} (${s.stepId})`);
    else {
      if (s.moved) lines.push(`moved step ${s.label} from ${s.positionBefore} to ${s.positionAfter}`);
      for (const c of s.changes) lines.push(`${s.label}.${c.path}: ${show(c.before)} → ${show(c.after)}`);
    }
  }
  return lines;
}

// ---------------------------------------------------------------------------------------------
// Saving

/** What the editor may change; the name, survey, profile and data paths stay those of the version edited. */
export interface PipelineEdit {
  description: string;
  onBadFile: "stop" | "skip";
  steps: EditedStep[];
}

/** The recorded definition of a pipeline version. */
export function versionDefinition(v: { definitionJson: string }): ResolvedPipeline {
  return JSON.parse(v.definitionJson) as ResolvedPipeline;
}

/**
 * Saves an edit of pipeline `pipelineId` made on version `baseVersionId` as a new version (an
 * unchanged pipeline keeps its version): validated as a pipeline file, refused when a newer
 * version was saved meanwhile, recorded in the audit trail with its differences.
 */
export function savePipelineEdit(
  db: Db,
  request: { pipelineId: number; baseVersionId: number; edit: PipelineEdit; actor: Actor },
): { versionId: number; version: number; created: boolean; changes: string[]; yaml: string } {
  const pipeline = getPipeline(db, request.pipelineId);
  if (!pipeline) throw new AppError("not-found", `Pipeline ${request.pipelineId} does not exist`, { field: "pipelineId" });
  const versions = listVersionsOfPipeline(db, pipeline.id);
  const base = versions.find((v) => v.id === request.baseVersionId);
  if (!base) throw new AppError("not-found", `Pipeline ${pipeline.name} has no version with id ${request.baseVersionId}`, { field: "baseVersionId" });
  const baseDefinition = versionDefinition(base);
  const model: EditedPipeline = { ...editorModel(baseDefinition), description: request.edit.description, onBadFile: request.edit.onBadFile, steps: request.edit.steps };
  const checked = validateEditedPipeline(model, base.sourcePath ? path.dirname(base.sourcePath) : process.cwd());
  // The text recorded is the canonical file of what was validated (settings complete, in schema
  // order): the file the pipeline page shows and offers, so running it from the command line
  // finds this very version (same text, same definition) instead of recording another.
  const yaml = pipelineYaml(editorModel(checked.resolved));
  const resolved = parsePipelineText(yaml, editedFileLabel(model), os.tmpdir());
  if (canonicalJson(resolved) !== canonicalJson(checked.resolved)) {
    throw new AppError("internal", `The pipeline file written for ${pipeline.name} does not read back as the pipeline checked`);
  }
  const changes = describeDifference(diffPipelines(baseDefinition, resolved));
  const { survey } = ensureSurvey(db, resolved.survey, resolved.profile);
  const saved = savePipelineVersion(db, {
    name: pipeline.name,
    surveyId: survey.id,
    sourceText: yaml,
    sourcePath: null,
    definition: resolved,
    contentHash: pipelineContentHash(yaml, resolved),
    actor: request.actor,
    expectedLatestVersionId: base.id,
    changes,
  });
  return { versionId: saved.version.id, version: saved.version.version, created: saved.created, changes, yaml };
}

/** The step catalogue for the editor: id, title, one-line description, and the settings a new step starts with (each default). */
export function stepCatalogue(): Array<{ id: string; title: string; description: string; defaults: Record<string, unknown> }> {
  return listSteps().map((s) => {
    const parsed = s.params.safeParse({});
    const defaults = parsed.success
      ? (parsed.data as Record<string, unknown>)
      : Object.fromEntries(describeParams(s).filter((d) => d.default !== undefined).map((d) => [d.name, d.default]));
    return { id: s.id, title: s.title, description: s.description.split(/(?<=\.)\s/)[0], defaults };
  });
}
