/**
 * Pipeline files: YAML naming the field data, the geometry table and the ordered steps with
 * their settings. Parsing keeps line positions so every error names the file, the line and
 * the field, and says what was expected.
 */
import fs from "node:fs";
import path from "node:path";
import { z } from "zod";
import { LineCounter, parseDocument, isMap, type Document, type Node } from "yaml";
import { AppError } from "./errors";
import { getStep, listSteps } from "./registry";
import { findUnknownSetting } from "./settings";
import { RUNNER_SLOTS, type SlotName } from "./types";

const LABEL = /^[a-z][a-z0-9-]{0,47}$/;

const stepEntrySchema = z
  .object({
    step: z.string().min(1).describe("step id from `tracewright steps`"),
    label: z
      .string()
      .regex(LABEL, "a label of lower-case letters, digits and dashes, starting with a letter")
      .optional(),
    settings: z.record(z.string(), z.unknown()).optional(),
    input: z
      .record(z.string(), z.string().min(1))
      .optional()
      .describe("where a slot comes from when not the latest value: { slot: <label> or <step id>#<n> }"),
  })
  .strict();

/** The pipeline file as written. */
export const pipelineFileSchema = z
  .object({
    name: z.string().regex(LABEL, "a name of lower-case letters, digits and dashes, starting with a letter"),
    description: z.string().optional(),
    survey: z.string().regex(LABEL, "a survey slug of lower-case letters, digits and dashes"),
    profile: z.string().min(1).optional(),
    fieldData: z.string().min(1).optional(),
    geometryTable: z.string().min(1).optional(),
    /** Applies to every import-records step that does not set it; its default is that step's. */
    onBadFile: z.enum(["stop", "skip"]).optional(),
    steps: z.array(stepEntrySchema).min(1, "at least one step"),
  })
  .strict();

export type PipelineFile = z.output<typeof pipelineFileSchema>;

/** A step of a validated pipeline: parameters complete with defaults. */
export interface ResolvedStep {
  label: string;
  stepId: string;
  version: number;
  params: Record<string, unknown>;
  /**
   * Inputs named in the file ({ slot: label of the earlier step that wrote it }); absent when the
   * step reads the latest value of every slot (the default, and every file written before).
   */
  inputs?: Record<string, string>;
}

/** A validated pipeline, paths made absolute. */
export interface ResolvedPipeline {
  name: string;
  description: string;
  survey: string;
  profile: string | null;
  /** Absolute folder of field files, or null for pure modelling. */
  fieldDataPath: string | null;
  geometryTablePath: string | null;
  onBadFile: "stop" | "skip";
  steps: ResolvedStep[];
}

function lineOf(doc: Document, counter: LineCounter, pathParts: ReadonlyArray<PropertyKey>): number | undefined {
  // Walk down as far as the path exists; report the deepest node found.
  for (let n = pathParts.length; n >= 0; n--) {
    const node = doc.getIn(pathParts.slice(0, n) as unknown[], true) as Node | undefined;
    if (node && typeof node === "object" && "range" in node && node.range) {
      return counter.linePos(node.range[0]).line;
    }
    if (n === 0) break;
  }
  return undefined;
}

function keyLine(doc: Document, counter: LineCounter, parent: ReadonlyArray<PropertyKey>, key: string): number | undefined {
  const node = parent.length === 0 ? doc.contents : (doc.getIn(parent as unknown[], true) as unknown);
  if (isMap(node)) {
    for (const item of node.items) {
      const k = item.key as Node | null;
      if (k && typeof k === "object" && "value" in k && (k as { value: unknown }).value === key && k.range) {
        return counter.linePos(k.range[0]).line;
      }
    }
  }
  return lineOf(doc, counter, parent);
}

function fieldName(parts: ReadonlyArray<PropertyKey>): string {
  return parts.reduce<string>((acc, p) => (typeof p === "number" ? `${acc}[${p}]` : acc ? `${acc}.${String(p)}` : String(p)), "");
}

function expectedFromIssue(issue: z.core.$ZodIssue): string {
  return issue.message;
}

/** Ends the check of one step after its errors were collected (never leaves parsePipelineText). */
class StepChecked extends Error {}

/**
 * Parses and validates pipeline text. `fileLabel` names the file in errors; `baseDir` resolves
 * relative paths. Throws AppError("bad-input") naming file, line and field.
 *
 * With `opts.errors`, the check goes on after an error to find the others: every issue of the
 * top-level schema, and then each step's (every settings issue of a step; a step with an error is
 * taken as writing its slots, so later steps are not blamed for it). They are pushed there in file
 * order and the first is thrown, as without the option. A file that is not YAML, or not a mapping,
 * stops at that error.
 */
export function parsePipelineText(text: string, fileLabel: string, baseDir: string, opts: { errors?: AppError[] } = {}): ResolvedPipeline {
  const sink = opts.errors;
  const counter = new LineCounter();
  const doc = parseDocument(text, { lineCounter: counter, prettyErrors: false, uniqueKeys: true });
  if (doc.errors.length > 0) {
    const e = doc.errors[0];
    const line = e.linePos?.[0]?.line ?? counter.linePos(e.pos[0]).line;
    throw new AppError("bad-input", `${fileLabel} line ${line}: not valid YAML: ${e.message.split("\n")[0]}`, {
      file: fileLabel,
      line,
      expected: "valid YAML",
    });
  }
  let raw: unknown;
  try {
    // yaml's own guard against alias expansion ("billion laughs"): at most 100 alias uses.
    raw = doc.toJS({ maxAliasCount: 100 });
  } catch (err) {
    throw new AppError("bad-input", `${fileLabel} line 1: YAML aliases expand too far (${err instanceof Error ? err.message.split("\n")[0] : String(err)})`, {
      file: fileLabel,
      line: 1,
      expected: "a pipeline file with at most 100 alias uses",
    });
  }
  if (!raw || typeof raw !== "object" || Array.isArray(raw)) {
    throw new AppError("bad-input", `${fileLabel}: expected a mapping with name, survey and steps at the top level`, {
      file: fileLabel,
      line: 1,
    });
  }
  const problem = (parts: ReadonlyArray<PropertyKey>, message: string, expected?: string, choices?: string[], useKeyLine = false): AppError => {
    const parent = parts.slice(0, -1);
    const last = parts[parts.length - 1];
    const line =
      useKeyLine && typeof last === "string" ? keyLine(doc, counter, parent, last) : lineOf(doc, counter, parts);
    const field = fieldName(parts);
    return new AppError("bad-input", `${fileLabel}${line ? ` line ${line}` : ""}, ${field || "top level"}: ${message}`, {
      file: fileLabel,
      line,
      field,
      expected,
      choices,
    });
  };
  const fail: Fail = (parts, message, expected, choices, useKeyLine) => {
    throw problem(parts, message, expected, choices, useKeyLine);
  };
  /** The error of one schema issue at `prefix` (an unknown key is named with the valid ones). */
  const issueProblem = (issue: z.core.$ZodIssue, prefix: ReadonlyArray<PropertyKey> = []): AppError => {
    if (issue.code === "unrecognized_keys" && prefix.length === 0) {
      const valid = Object.keys(pipelineFileSchema.shape);
      const stepKeys = Object.keys(stepEntrySchema.shape);
      const inStep = issue.path.length >= 2 && issue.path[0] === "steps";
      return problem(
        [...issue.path, issue.keys[0]],
        `unknown key "${issue.keys[0]}"; valid keys: ${(inStep ? stepKeys : valid).join(", ")}`,
        undefined,
        inStep ? stepKeys : valid,
        true,
      );
    }
    return problem([...prefix, ...issue.path], expectedFromIssue(issue), issue.message);
  };

  const top = pipelineFileSchema.safeParse(raw);
  if (!top.success) {
    const all = top.error.issues.map((issue) => issueProblem(issue));
    if (sink) sink.push(...all);
    throw all[0];
  }
  const file = top.data;

  const known = new Set<SlotName>(RUNNER_SLOTS.filter((s) => (s === "geometryTable" ? !!file.geometryTable : !!file.fieldData)));
  const labels = new Set<string>();
  const earlier: Array<{ label: string; stepId: string; writes: SlotName[] }> = [];
  const checkStep = (entry: (typeof file.steps)[number], i: number): ResolvedStep => {
    let step;
    try {
      step = getStep(entry.step);
    } catch {
      const ids = listSteps().map((s) => s.id);
      return fail(["steps", i, "step"], `unknown step "${entry.step}"; valid steps: ${ids.join(", ")}`, "a step id", ids);
    }
    const label = entry.label ?? entry.step;
    if (labels.has(label)) {
      fail(["steps", i, entry.label ? "label" : "step"], `label "${label}" is used twice; give one of the steps a distinct label`);
    }
    labels.add(label);
    const settings: Record<string, unknown> = { ...(entry.settings ?? {}) };
    // A setting written as { fromFile: <path> } takes the text of that file (relative to the
    // pipeline file), e.g. build-model's csvGrid. The text becomes part of the recorded settings.
    for (const [key, value] of Object.entries(settings)) {
      if (value && typeof value === "object" && !Array.isArray(value) && Object.keys(value).length === 1 && "fromFile" in value) {
        const ref = (value as { fromFile: unknown }).fromFile;
        const at = ["steps", i, "settings", key, "fromFile"];
        if (typeof ref !== "string" || ref === "") fail(at, "expected a file path");
        settings[key] = readFromFile(ref as string, baseDir, (message, expected) => fail(at, message, expected));
      }
    }
    if (entry.step === "import-records" && settings.onBadFile === undefined && file.onBadFile) settings.onBadFile = file.onBadFile;
    const unknown = findUnknownSetting(step, Object.keys(entry.settings ?? {}));
    if (unknown) {
      fail(
        ["steps", i, "settings", unknown.key],
        `unknown setting "${unknown.key}" for step ${step.id}; valid settings: ${unknown.valid.join(", ") || "(none)"}`,
        undefined,
        unknown.valid,
        true,
      );
    }
    const parsed = step.params.safeParse(settings);
    if (!parsed.success) {
      const all = parsed.error.issues.map((issue: z.core.$ZodIssue) => issueProblem(issue, ["steps", i, "settings"]));
      if (!sink) throw all[0];
      sink.push(...all);
      throw new StepChecked();
    }
    const inputs = entry.input ? resolveInputs(entry.input, i, step, earlier, file.steps, fail) : undefined;
    for (const slot of step.reads) {
      if (!known.has(slot) && !inputs?.[slot]) {
        const hint =
          slot === "geometryTable"
            ? "add geometryTable: <csv file> at the top of the pipeline file"
            : slot === "fieldFiles"
              ? "add fieldData: <folder> at the top of the pipeline file"
              : `put a step that writes ${slot} earlier`;
        fail(["steps", i, "step"], `step ${step.id} needs "${slot}", which nothing before it provides (${hint})`);
      }
    }
    for (const slot of step.writes) known.add(slot);
    earlier.push({ label, stepId: step.id, writes: step.writes });
    const resolvedStep: ResolvedStep = { label, stepId: step.id, version: step.version, params: parsed.data as Record<string, unknown> };
    return inputs ? { ...resolvedStep, inputs } : resolvedStep;
  };
  const steps: ResolvedStep[] = file.steps.map((entry, i) => {
    if (!sink) return checkStep(entry, i);
    try {
      return checkStep(entry, i);
    } catch (err) {
      if (err instanceof AppError) sink.push(err);
      else if (!(err instanceof StepChecked)) throw err;
      // Taken as done: its label is used and its slots written, so later steps are checked as they would be.
      const label = entry.label ?? entry.step;
      labels.add(label);
      try {
        const step = getStep(entry.step);
        for (const slot of step.writes) known.add(slot);
        if (!earlier.some((e) => e.label === label)) earlier.push({ label, stepId: step.id, writes: step.writes });
      } catch {
        // an unknown step writes nothing
      }
      return null as unknown as ResolvedStep;
    }
  });
  if (sink && sink.length > 0) throw sink[0];

  return {
    name: file.name,
    description: file.description ?? "",
    survey: file.survey,
    profile: file.profile ?? null,
    fieldDataPath: file.fieldData ? path.resolve(baseDir, file.fieldData) : null,
    geometryTablePath: file.geometryTable ? path.resolve(baseDir, file.geometryTable) : null,
    // Recorded as before (the definition's hash names the pipeline version); the default is the import step's.
    onBadFile: file.onBadFile ?? (getStep("import-records").params.parse({}) as { onBadFile: "stop" | "skip" }).onBadFile,
    steps,
  };
}

type Fail = (parts: ReadonlyArray<PropertyKey>, message: string, expected?: string, choices?: string[], useKeyLine?: boolean) => never;

const OCCURRENCE = /^([a-z][a-z0-9-]*)#([1-9][0-9]*)$/;

/**
 * Resolves `input: { slot: ref }` of step `i` to labels of earlier steps. A ref is a label, or
 * `<step id>#<n>` (the n-th step of that id in the file), or a bare step id that occurs once
 * before. Refuses slots the step does not read, refs that name nothing, a later step, a step that
 * does not write the slot, or more than one step.
 */
function resolveInputs(
  input: Record<string, string>,
  i: number,
  step: { id: string; reads: SlotName[]; optionalReads?: SlotName[] },
  earlier: ReadonlyArray<{ label: string; stepId: string; writes: SlotName[] }>,
  all: ReadonlyArray<{ step: string }>,
  fail: Fail,
): Record<string, string> {
  const readable = [...step.reads, ...(step.optionalReads ?? [])];
  const out: Record<string, string> = {};
  for (const [slot, ref] of Object.entries(input)) {
    const at = ["steps", i, "input", slot];
    if (!readable.includes(slot as SlotName)) {
      fail(at, `step ${step.id} does not read "${slot}"; it reads: ${readable.join(", ") || "(nothing)"}`, undefined, readable, true);
    }
    let target: { label: string; stepId: string; writes: SlotName[] } | undefined;
    const occurrence = OCCURRENCE.exec(ref);
    if (occurrence) {
      const [, id, nText] = occurrence;
      const n = Number(nText);
      const positions = all.map((s, k) => (s.step === id ? k : -1)).filter((k) => k >= 0);
      if (positions.length < n) {
        fail(at, `"${ref}": the file has ${positions.length === 0 ? "no" : `only ${positions.length}`} ${id} step${positions.length === 1 ? "" : "s"}`);
      }
      if (positions[n - 1] >= i) fail(at, `"${ref}" comes at or after this step; an input must come from an earlier step`);
      target = earlier[positions[n - 1]];
    } else {
      const byLabel = earlier.find((e) => e.label === ref);
      const byId = earlier.filter((e) => e.stepId === ref && e.label !== ref);
      const sameId = earlier.filter((e) => e.stepId === ref);
      const choices = sameId.map((_, k) => `${ref}#${k + 1}`);
      if (byLabel && byId.length > 0) {
        fail(at, `"${ref}" is ambiguous: the label of one earlier step and the step id of ${byId.map((e) => e.label).join(", ")}; write ${choices.join(" or ")}, or a distinct label`, undefined, choices);
      }
      if (!byLabel && byId.length > 1) {
        fail(at, `"${ref}" is ambiguous: ${byId.length} earlier ${ref} steps (${byId.map((e) => e.label).join(", ")}); write ${choices.join(" or ")}, or a label`, undefined, choices);
      }
      target = byLabel ?? byId[0];
      if (!target) {
        const later = all.slice(i).some((s) => s.step === ref);
        const names = earlier.map((e) => e.label);
        fail(at, later ? `"${ref}" comes at or after this step; an input must come from an earlier step` : `no earlier step is labelled "${ref}"; earlier steps: ${names.join(", ") || "(none)"}`, undefined, names);
      }
    }
    if (!target!.writes.includes(slot as SlotName)) {
      fail(at, `${target!.label} (${target!.stepId}) does not write "${slot}"; it writes: ${target!.writes.join(", ")}`);
    }
    out[slot] = target!.label;
  }
  return out;
}

/** Largest file a `fromFile` setting may take, bytes (a starting-model grid is well below). */
export const FROM_FILE_MAX_BYTES = 8 * 1024 * 1024;

/**
 * The text of a `fromFile` setting. Only files in the pipeline file's folder or below are read,
 * judged after resolving symbolic links on both sides (a link inside the folder that points out
 * of it is refused), and only regular files up to {@link FROM_FILE_MAX_BYTES}.
 */
function readFromFile(ref: string, baseDir: string, fail: (message: string, expected?: string) => never): string {
  const expected = "a text file in the pipeline file's folder or below";
  let root: string;
  try {
    root = fs.realpathSync(baseDir);
  } catch {
    return fail(`the pipeline file's folder ${baseDir} cannot be read`, expected);
  }
  const wanted = path.resolve(baseDir, ref);
  let real: string;
  try {
    real = fs.realpathSync(wanted);
  } catch {
    return fail(`the file ${ref} cannot be read (looked for ${wanted})`, "a readable text file");
  }
  const inside = path.relative(root, real);
  if (inside === "" || inside.startsWith("..") || path.isAbsolute(inside)) {
    return fail(`the file ${ref} is outside the pipeline file's folder (${root}); fromFile reads only files in that folder or below`, expected);
  }
  const stat = fs.statSync(real);
  if (!stat.isFile()) return fail(`${ref} is not a regular file`, expected);
  if (stat.size > FROM_FILE_MAX_BYTES) return fail(`the file ${ref} has ${stat.size} bytes, more than the ${FROM_FILE_MAX_BYTES} a setting may take`, expected);
  try {
    return fs.readFileSync(real, "utf8");
  } catch {
    return fail(`the file ${ref} cannot be read (looked for ${wanted})`, "a readable text file");
  }
}

/** Reads and validates a pipeline file from disk. */
export function loadPipelineFile(file: string): { resolved: ResolvedPipeline; text: string; absolutePath: string } {
  const absolutePath = path.resolve(file);
  let text: string;
  try {
    text = fs.readFileSync(absolutePath, "utf8");
  } catch {
    throw new AppError("not-found", `Pipeline file ${file} cannot be read (does it exist?)`, { file });
  }
  const resolved = parsePipelineText(text, path.basename(absolutePath), path.dirname(absolutePath));
  return { resolved, text, absolutePath };
}

/** The settings merge lives with the other setting rules (pipeline/settings.ts). */
export { mergeSettings } from "./settings";
