/**
 * What a model is, for its heading and its cautions: the starting model a step built from
 * given layers, or an inverted model at an iteration (and stage) of an inversion. The kind comes
 * from the step that wrote the model and, when the artifact or the step summary records them,
 * the iteration and stage numbers.
 */

export type ModelKind =
  | { kind: "starting" }
  | { kind: "inverted"; iteration?: number; iterationCount?: number; stage?: number; stageCount?: number };

const STARTING_STEPS = new Set(["build-model"]);

const num = (v: unknown): number | undefined => (typeof v === "number" && Number.isFinite(v) ? v : undefined);

/** The kind of the model written by a step (`stepId`), with iteration numbers read from `info` (artifact outline or step summary) when present. */
export function modelKindOf(stepId: string, ...info: Array<Record<string, unknown> | null | undefined>): ModelKind {
  if (STARTING_STEPS.has(stepId)) return { kind: "starting" };
  const pick = (...keys: string[]) => {
    for (const i of info) for (const k of keys) if (i && num(i[k]) !== undefined) return num(i[k]);
    return undefined;
  };
  return {
    kind: "inverted",
    iteration: pick("iteration", "iterations", "iterationsDone"),
    iterationCount: pick("iterationCount", "maxIterations"),
    stage: pick("stage"),
    stageCount: pick("stageCount", "stages"),
  };
}

/** "Starting model", "Inverted model, iteration 12 of 20, stage 2 of 3". */
export function modelHeading(k: ModelKind): string {
  if (k.kind === "starting") return "Starting model";
  const parts = ["Inverted model"];
  if (k.iteration !== undefined) parts.push(`iteration ${k.iteration}${k.iterationCount !== undefined ? ` of ${k.iterationCount}` : ""}`);
  if (k.stage !== undefined) parts.push(`stage ${k.stage}${k.stageCount !== undefined ? ` of ${k.stageCount}` : ""}`);
  return parts.join(", ");
}
