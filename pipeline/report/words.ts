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

/** Symbols the shipped fonts (Latin subset) lack, spelled out. */
const SPELLED: Record<string, string> = {
  "\u03b5": "epsilon",
  "\u03c1": "rho",
  "\u03bb": "lambda",
  "\u03bc": "mu",
  "\u03c3": "sigma",
  "\u0394": "delta ",
  "\u03a3": "sum of ",
  "\u221a": "sqrt",
  "\u2265": ">=",
  "\u2264": "<=",
  "\u2248": "~",
  "\u2192": "->",
  "\u2202": "d",
};

/**
 * Text the shipped fonts can draw: the few symbols they lack are spelled out, anything else
 * outside their coverage (Latin-1, general punctuation, a few signs; see @fontsource's "latin"
 * subset) becomes "?" instead of an empty box.
 */
export function fontSafe(text: string): string {
  let out = "";
  for (const ch of text) {
    const cp = ch.codePointAt(0)!;
    if (SPELLED[ch] !== undefined) out += SPELLED[ch];
    else if (cp <= 0xff || (cp >= 0x2000 && cp <= 0x206f) || [0x131, 0x152, 0x153, 0x20ac, 0x2122, 0x2191, 0x2193, 0x2212, 0x2215].includes(cp)) out += ch;
    else out += "?";
  }
  return out;
}
