/**
 * Settings of a step (its zod `params`): the one check for unknown setting names, and the merge
 * of changed settings into recorded ones that reruns use. A setting's default and its check live
 * in the step's zod schema alone; the pipeline file, reruns, the CLI and the control room all
 * validate through it (see DEVELOPERS.md, "The path of one setting").
 */
import { AppError } from "./errors";
import { getStep, paramsJsonSchema } from "./registry";
import type { AnyStepDefinition } from "./step";

/** Names of a step's settings, in schema order. */
export function settingNames(step: AnyStepDefinition): string[] {
  return Object.keys(paramsJsonSchema(step).properties ?? {});
}

/** The first of `keys` that is not a setting of `step`, with the valid names; null when all are known. */
export function findUnknownSetting(step: AnyStepDefinition, keys: Iterable<string>): { key: string; valid: string[] } | null {
  const valid = settingNames(step);
  for (const key of keys) if (!valid.includes(key)) return { key, valid };
  return null;
}

function isPlainObject(v: unknown): v is Record<string, unknown> {
  return typeof v === "object" && v !== null && !Array.isArray(v) && !ArrayBuffer.isView(v);
}

/**
 * Settings with changes applied: a setting that holds an object is merged key by key (so
 * `grid: { depthM: 30 }` changes the depth and keeps the rest); anything else is replaced.
 */
export function mergeSettings(base: Record<string, unknown>, changes: Record<string, unknown>): Record<string, unknown> {
  const out: Record<string, unknown> = { ...base };
  for (const [k, v] of Object.entries(changes)) {
    out[k] = isPlainObject(v) && isPlainObject(base[k]) ? mergeSettings(base[k] as Record<string, unknown>, v) : v;
  }
  return out;
}

/**
 * Re-validates a step's recorded settings with changes applied (reruns). Returns complete
 * settings. Throws AppError naming `<label>.<setting>`.
 */
export function applySettingChanges(
  step: { label: string; stepId: string; params: Record<string, unknown> },
  changes: Record<string, unknown>,
): Record<string, unknown> {
  const def = getStep(step.stepId);
  const unknown = findUnknownSetting(def, Object.keys(changes));
  if (unknown) {
    throw new AppError("bad-input", `${step.label}.${unknown.key}: unknown setting; valid settings of ${def.id}: ${unknown.valid.join(", ")}`, {
      field: `${step.label}.${unknown.key}`,
      choices: unknown.valid,
    });
  }
  const parsed = def.params.safeParse(mergeSettings(step.params, changes));
  if (!parsed.success) {
    const issue = parsed.error.issues[0];
    const field = [step.label, ...issue.path.map(String)].join(".");
    throw new AppError("bad-input", `${field}: ${issue.message}`, { field, expected: issue.message });
  }
  return parsed.data as Record<string, unknown>;
}

/** A step as a run records it. */
export interface RecordedStep {
  label: string;
  stepId: string;
  version: number;
  params: Record<string, unknown>;
}

/**
 * The steps of a rerun: the parent run's steps with their recorded settings, `changes`
 * ({ label: { setting: value } }) applied at `fromLabel` or later. Refuses an unknown start step,
 * unknown labels, changes before the start step and settings the step's schema refuses.
 */
export function planRerun(
  parentRunId: number,
  parentSteps: RecordedStep[],
  fromLabel: string,
  changes: Record<string, Record<string, unknown>>,
): RecordedStep[] {
  const labels = parentSteps.map((s) => s.label);
  const from = labels.indexOf(fromLabel);
  if (from < 0) {
    throw new AppError("bad-input", `Run ${parentRunId} has no step "${fromLabel}"; its steps: ${labels.join(", ")}`, {
      field: "fromLabel",
      choices: labels,
    });
  }
  for (const label of Object.keys(changes)) {
    const i = labels.indexOf(label);
    if (i < 0) {
      throw new AppError("bad-input", `${label}: no such step in run ${parentRunId}; its steps: ${labels.join(", ")}`, {
        field: label,
        choices: labels,
      });
    }
    if (i < from) {
      throw new AppError("bad-input", `${label}: this step comes before ${fromLabel}; start the rerun from ${label} (or earlier) to change it`, {
        field: label,
      });
    }
  }
  return parentSteps.map((s) => {
    const c = Object.hasOwn(changes, s.label) ? changes[s.label] : undefined;
    return c ? { ...s, params: applySettingChanges(s, c) } : s;
  });
}
