/** How the report writes times, lengths and velocities (the PDF and the print-friendly page alike). */
import { valueRange } from "./figures";

/** "2026-12-02 07:15 UTC". */
export function formatUtc(d: Date): string {
  return `${d.toISOString().slice(0, 16).replace("T", " ")} UTC`;
}

/** Metres, e.g. "12.5 m". */
export const m = (v: number, digits = 2) => `${+v.toFixed(digits)} m`;
/** Metres per second, rounded, e.g. "163 m/s". */
export const mps = (v: number) => `${Math.round(v)} m/s`;

/** Vs range of a model in words, as the report prints it (the tests read it back from the PDF). */
export function vsRangeWords(model: { vs: Float32Array }): string {
  const r = valueRange(model.vs);
  return `Vs from ${mps(r.min)} to ${mps(r.max)}`;
}
