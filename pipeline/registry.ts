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

/** A parameter of a step as people see it (CLI listing, rerun form, pipeline editor). */
export interface ParamDoc {
  name: string;
  type: "number" | "integer" | "boolean" | "string" | "enum" | "array" | "object";
  default?: unknown;
  description: string;
  choices?: string[];
  /** The choices as the schema holds them (numbers stay numbers, e.g. a mains frequency of 0, 50 or 60 Hz). */
  choiceValues?: unknown[];
  minimum?: number;
  maximum?: number;
  /** True when the limit itself is refused (zod's `.positive()`, `.gt()`). */
  exclusiveMinimum?: boolean;
  exclusiveMaximum?: boolean;
  optional: boolean;
  /** The setting may be null (the description says what null means). */
  nullable?: boolean;
  /** For an array of objects (e.g. the inversion's stages): the documentation of each item's fields. */
  items?: ParamDoc[];
  /** For an array of objects of several kinds (e.g. a model's shapes): one entry per kind, told apart by `key`. */
  variants?: Array<{ key: string; tag: string; fields: ParamDoc[] }>;
  /** For an array of plain values or of fixed-length tuples: the documentation of one element. */
  element?: ParamDoc;
  /** For a fixed-length tuple (e.g. a picked point [frequency Hz, velocity m/s]): one entry per position. */
  tuple?: ParamDoc[];
  /** Smallest and largest number of elements of an array. */
  minItems?: number;
  maxItems?: number;
  /** For an object: the documentation of its fields (e.g. a model's grid). */
  fields?: ParamDoc[];
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
  minItems?: number;
  maxItems?: number;
  anyOf?: JsonSchema[];
  oneOf?: JsonSchema[];
  allOf?: JsonSchema[];
  items?: JsonSchema | false;
  prefixItems?: JsonSchema[];
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

/** Describes each parameter of a step: type, default, unit-bearing description, choices, limits, and the parts of lists and objects. */
export function describeParams(step: StepDefinition): ParamDoc[] {
  return describeProperties(paramsJsonSchema(step));
}

/** Documentation of the properties of an object schema (recursing into objects, lists and tuples). */
function describeProperties(schema: JsonSchema): ParamDoc[] {
  const props = schema.properties ?? {};
  const required = new Set(schema.required ?? []);
  return Object.entries(props).map(([name, p]) => describeNode(name, p, required.has(name)));
}

/** A schema without its "or null" alternative, and whether it had one. */
function withoutNull(p: JsonSchema): { inner: JsonSchema; nullable: boolean } {
  if (Array.isArray(p.type) && p.type.includes("null")) {
    const rest = p.type.filter((t) => t !== "null");
    return { inner: { ...p, type: rest.length === 1 ? rest[0] : rest }, nullable: true };
  }
  const alt = p.anyOf ?? p.oneOf;
  if (alt && alt.some((a) => a.type === "null")) {
    const rest = alt.filter((a) => a.type !== "null");
    const { anyOf: _a, oneOf: _o, ...own } = p;
    void _a;
    void _o;
    return { inner: rest.length === 1 ? { ...rest[0], ...own } : { ...own, anyOf: rest }, nullable: true };
  }
  return { inner: p, nullable: false };
}

function describeNode(name: string, p: JsonSchema, isRequired: boolean): ParamDoc {
  const { inner, nullable } = withoutNull(p);
  const alt = inner.anyOf ?? inner.oneOf;
  const choiceValues = inner.enum
    ? inner.enum
    : alt && alt.every((a) => a.const !== undefined || a.enum)
      ? alt.flatMap((a) => (a.enum ? a.enum : [a.const]))
      : undefined;
  const min = inner.minimum ?? inner.exclusiveMinimum;
  const max = inner.maximum ?? inner.exclusiveMaximum;
  const type = kindOf(inner);
  const doc: ParamDoc = {
    name,
    type,
    default: p.default,
    description: p.description ?? inner.description ?? "",
    ...(choiceValues ? { choices: choiceValues.map(String), choiceValues } : {}),
    ...(min !== undefined ? { minimum: min } : {}),
    ...(max !== undefined ? { maximum: max } : {}),
    ...(inner.minimum === undefined && inner.exclusiveMinimum !== undefined ? { exclusiveMinimum: true } : {}),
    ...(inner.maximum === undefined && inner.exclusiveMaximum !== undefined ? { exclusiveMaximum: true } : {}),
    optional: !isRequired || p.default !== undefined,
    ...(nullable ? { nullable } : {}),
  };
  if (type === "object" && inner.properties) doc.fields = describeProperties(inner);
  if (type === "array") {
    if (inner.minItems !== undefined) doc.minItems = inner.minItems;
    if (inner.maxItems !== undefined) doc.maxItems = inner.maxItems;
    if (inner.prefixItems) doc.tuple = inner.prefixItems.map((t, k) => describeNode(String(k), t, true));
    const items = inner.items;
    if (items && typeof items === "object") {
      const kinds = items.oneOf ?? items.anyOf;
      if (items.properties) doc.items = describeProperties(items);
      else if (kinds && kinds.length > 0 && kinds.every((k) => k.properties)) {
        // Objects told apart by one field that holds a constant in each (e.g. kind: rectangle | ellipse | polygon).
        const key = Object.keys(kinds[0].properties!).find((k) => kinds.every((v) => v.properties?.[k]?.const !== undefined)) ?? "kind";
        doc.variants = kinds.map((v) => ({ key, tag: String(v.properties?.[key]?.const ?? ""), fields: describeProperties(v) }));
      } else doc.element = describeNode("item", items, true);
    }
  }
  return doc;
}
