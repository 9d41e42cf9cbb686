/**
 * Pure helpers of the list editor for settings that are arrays of objects (e.g. the
 * inversion's stages): reorder, add, remove, read a field's box, check a field against its
 * documented limits, and the unit read from a setting's name.
 */
import type { ParamDoc } from "@/pipeline/registry";

export type Item = Record<string, unknown>;

/** The list with the item at `from` moved to `to` (indices clamped; a new array). */
export function moveItem<T>(list: readonly T[], from: number, to: number): T[] {
  const out = list.slice();
  if (from < 0 || from >= out.length) return out;
  const target = Math.max(0, Math.min(out.length - 1, to));
  const [it] = out.splice(from, 1);
  out.splice(target, 0, it);
  return out;
}

/** The list without the item at `index` (a new array). */
export function removeItem<T>(list: readonly T[], index: number): T[] {
  return list.filter((_, i) => i !== index);
}

/**
 * A new item to append: a copy of the last item when there is one (a new stage usually
 * resembles the one before), else each field's default.
 */
export function newItem(docs: readonly ParamDoc[], list: readonly Item[]): Item {
  const last = list.at(-1);
  if (last) return { ...last };
  const out: Item = {};
  for (const d of docs) if (d.default !== undefined) out[d.name] = d.default;
  return out;
}

/** The value of a field from its box's text: numbers parsed (empty = unset), booleans, text. */
export function fieldValue(doc: ParamDoc, raw: string | boolean): unknown {
  if (doc.type === "boolean") return Boolean(raw);
  if (typeof raw !== "string") return raw;
  if (doc.type === "number" || doc.type === "integer") {
    if (raw.trim() === "") return undefined;
    const n = Number(raw);
    return Number.isFinite(n) ? n : raw;
  }
  return raw;
}

/** A message when a field's value breaks its documented type or limits, else null. */
export function fieldProblem(doc: ParamDoc, value: unknown): string | null {
  if (value === undefined) return doc.optional ? null : "Required.";
  if (doc.type === "number" || doc.type === "integer") {
    if (typeof value !== "number" || !Number.isFinite(value)) return "Enter a number.";
    if (doc.type === "integer" && !Number.isInteger(value)) return "Enter a whole number.";
    if (doc.minimum !== undefined && value < doc.minimum) return `At least ${doc.minimum}.`;
    if (doc.maximum !== undefined && value > doc.maximum) return `At most ${doc.maximum}.`;
  }
  if (doc.type === "enum" && doc.choices && !doc.choices.includes(String(value))) return `One of ${doc.choices.join(", ")}.`;
  return null;
}

/** "lowPassHz" → "Hz", "windowEndMs" → "ms", "maxOffsetM" → "m"; null when the name carries no unit. */
export function unitOfName(name: string): string | null {
  const m = /(Hz|Ms|Mps|KgM3|Kgm3|Db|Percent|M|S)$/.exec(name);
  const map: Record<string, string> = { Hz: "Hz", Ms: "ms", S: "s", M: "m", Mps: "m/s", Db: "dB", Percent: "%", Kgm3: "kg/m³", KgM3: "kg/m³" };
  return m ? map[m[1]] : null;
}

/** "lowPassHz" → "low pass", "stopBelowRelativeChange" → "stop below relative change" (unit suffix dropped). */
export function labelOfName(name: string): string {
  const unit = /(Hz|Ms|Mps|KgM3|Kgm3|Db|Percent|M|S)$/.exec(name);
  const base = unit && name.length > unit[1].length ? name.slice(0, -unit[1].length) : name;
  return base.replace(/([a-z0-9])([A-Z])/g, "$1 $2").toLowerCase();
}
