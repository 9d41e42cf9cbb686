/**
 * The ordered list of processing steps. Order here is the usual pipeline order and the order
 * the CLI and the control room list them in.
 */
import { z } from "zod";
import type { AnyStepDefinition, StepDefinition } from "./step";
import { AppError } from "./errors";
import { importRecordsStep } from "./steps/import-records";
import { geometryStep } from "./steps/geometry";
import { fieldCheckStep } from "./steps/field-check";
import { verticalStackStep } from "./steps/vertical-stack";
import { traceEditStep } from "./steps/trace-edit";
import { timeWindowStep } from "./steps/time-window";
import { frequencyFilterStep } from "./steps/frequency-filter";
import { firstArrivalsStep } from "./steps/first-arrivals";
import { firstArrivalTomographyStep } from "./steps/first-arrival-tomography";
import { muteStep } from "./steps/mute";
import { gainStep } from "./steps/gain";
import { lineSourceStep } from "./steps/line-source";
import { spectraStep } from "./steps/spectra";
import { dispersionImageStep } from "./steps/dispersion-image";
import { surfaceWaveProfileStep } from "./steps/surface-wave-profile";
import { buildModelStep } from "./steps/build-model";
import { forwardModelStep } from "./steps/forward-model";
import { misfitStep } from "./steps/misfit";
import { sourceWaveletStep } from "./steps/source-wavelet";
import { waveformInversionStep } from "./steps/waveform-inversion";

const STEPS: AnyStepDefinition[] = [
  importRecordsStep,
  geometryStep,
  fieldCheckStep,
  verticalStackStep,
  traceEditStep,
  timeWindowStep,
  frequencyFilterStep,
  firstArrivalsStep,
  firstArrivalTomographyStep,
  muteStep,
  gainStep,
  lineSourceStep,
  spectraStep,
  dispersionImageStep,
  surfaceWaveProfileStep,
  buildModelStep,
  sourceWaveletStep,
  forwardModelStep,
  misfitStep,
  waveformInversionStep,
];

/** All steps in pipeline order. */
export function listSteps(): AnyStepDefinition[] {
  return STEPS;
}

/**
 * Adds a step at the end of the list (extensions and tests). Throws if the id is taken.
 */
export function registerStep(step: AnyStepDefinition): void {
  if (STEPS.some((s) => s.id === step.id)) throw new AppError("conflict", `A step with id "${step.id}" is registered already`);
  STEPS.push(step);
}

/** The step with this id; throws AppError("not-found") listing the valid ids. */
export function getStep(id: string): AnyStepDefinition {
  const step = STEPS.find((s) => s.id === id);
  if (!step) {
    const ids = STEPS.map((s) => s.id);
    throw new AppError("not-found", `Unknown step "${id}". Valid steps: ${ids.join(", ")}`, { choices: ids });
  }
  return step;
}

/** A parameter of a step as people see it (CLI listing, rerun form). */
export interface ParamDoc {
  name: string;
  type: "number" | "integer" | "boolean" | "string" | "enum" | "array" | "object";
  default?: unknown;
  description: string;
  choices?: string[];
  minimum?: number;
  maximum?: number;
  optional: boolean;
  /** For an array of objects (e.g. the inversion's stages): the documentation of each item's fields. */
  items?: ParamDoc[];
}

type JsonSchema = {
  type?: string | string[];
  properties?: Record<string, JsonSchema>;
  required?: string[];
  default?: unknown;
  description?: string;
  enum?: unknown[];
  const?: unknown;
  minimum?: number;
  maximum?: number;
  exclusiveMinimum?: number;
  exclusiveMaximum?: number;
  anyOf?: JsonSchema[];
  oneOf?: JsonSchema[];
  allOf?: JsonSchema[];
  items?: JsonSchema;
};

/** JSON Schema of a step's parameters (input side: defaults make fields optional). */
export function paramsJsonSchema(step: StepDefinition): JsonSchema {
  return z.toJSONSchema(step.params, { io: "input", unrepresentable: "any" }) as JsonSchema;
}

function kindOf(s: JsonSchema): ParamDoc["type"] {
  if (s.enum) return "enum";
  const t = Array.isArray(s.type) ? s.type.find((x) => x !== "null") : s.type;
  if (t === "number" || t === "integer" || t === "boolean" || t === "string" || t === "array" || t === "object") return t;
  const alt = s.anyOf ?? s.oneOf;
  if (alt) {
    if (alt.every((a) => a.const !== undefined || a.enum)) return "enum";
    const first = alt.find((a) => a.type !== "null");
    if (first) return kindOf(first);
  }
  return "object";
}

/** Describes each parameter of a step: type, default, unit-bearing description, choices, limits. */
export function describeParams(step: StepDefinition): ParamDoc[] {
  return describeProperties(paramsJsonSchema(step));
}

/** Documentation of the properties of an object schema (recursing into arrays of objects). */
function describeProperties(schema: JsonSchema): ParamDoc[] {
  const props = schema.properties ?? {};
  const required = new Set(schema.required ?? []);
  return Object.entries(props).map(([name, p]) => {
    const alt = p.anyOf ?? p.oneOf;
    const choices = p.enum
      ? p.enum.map(String)
      : alt && alt.every((a) => a.const !== undefined || a.enum)
        ? alt.flatMap((a) => (a.enum ? a.enum.map(String) : [String(a.const)]))
        : undefined;
    const min = p.minimum ?? p.exclusiveMinimum;
    const max = p.maximum ?? p.exclusiveMaximum;
    const type = kindOf(p);
    const items = type === "array" && p.items?.properties ? describeProperties(p.items) : undefined;
    return {
      name,
      type,
      default: p.default,
      description: p.description ?? "",
      ...(choices ? { choices } : {}),
      ...(min !== undefined ? { minimum: min } : {}),
      ...(max !== undefined ? { maximum: max } : {}),
      optional: !required.has(name) || p.default !== undefined,
      ...(items ? { items } : {}),
    };
  });
}
