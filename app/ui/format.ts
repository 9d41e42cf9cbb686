/** Display formatting shared by the control room's components. */

/** "1.2 s", "3 min 04 s", "—". */
export function formatDuration(ms: number | null | undefined): string {
  if (ms === null || ms === undefined || !Number.isFinite(ms)) return "—";
  if (ms < 1000) return `${Math.round(ms)} ms`;
  const s = ms / 1000;
  if (s < 60) return `${s.toFixed(s < 10 ? 1 : 0)} s`;
  const m = Math.floor(s / 60);
  const rest = Math.round(s - m * 60);
  if (m < 60) return `${m} min ${String(rest).padStart(2, "0")} s`;
  return `${Math.floor(m / 60)} h ${String(m % 60).padStart(2, "0")} min`;
}

/** "14 Nov 2025, 09:31" in the viewer's time zone (fixed en-GB style). */
export function formatTime(ms: number | null | undefined): string {
  if (!ms) return "—";
  return new Date(ms).toLocaleString("en-GB", { day: "numeric", month: "short", year: "numeric", hour: "2-digit", minute: "2-digit" });
}

/** First 10 hex digits of a hash. */
export function shortHash(hash: string | null | undefined): string {
  return hash ? hash.slice(0, 10) : "—";
}

/** Parameter value as text. */
export function formatValue(v: unknown): string {
  if (v === undefined) return "—";
  if (typeof v === "string") return v;
  return JSON.stringify(v);
}

/** The door that started something, in words. */
export const DOOR_LABELS: Record<string, string> = { cli: "command line", web: "control room", watcher: "folder watcher" };

/**
 * A number rounded for reading: integers as they are (with thin grouping above 9999), others
 * to `digits` significant digits (4 by default) without trailing zeros; very small or large
 * magnitudes in exponent form. `unit` is appended after a space.
 */
export function formatNumber(v: number, unit?: string | null, digits = 4): string {
  if (!Number.isFinite(v)) return String(v);
  let text: string;
  const a = Math.abs(v);
  if (Number.isInteger(v) && a < 1e15) text = a >= 1e4 ? v.toLocaleString("en-GB") : String(v);
  else if (a !== 0 && (a < 1e-3 || a >= 1e9)) text = v.toExponential(Math.max(0, digits - 2)).replace(/\.?0+e/, "e");
  else {
    const decimals = Math.max(0, digits - 1 - Math.floor(Math.log10(a || 1)));
    text = String(Number(v.toFixed(Math.min(decimals, 10))));
  }
  return unit ? `${text} ${unit}` : text;
}

/** Unit suffixes of setting and summary names (house style: units in the name), longest first. */
const NAME_UNITS: Array<[RegExp, string, number]> = [
  [/KgPerM3$/, "kg/m³", 7],
  [/KgM3$/, "kg/m³", 4],
  [/MPerS$/, "m/s", 5],
  [/Mps$/, "m/s", 3],
  [/Percent$/, "%", 7],
  [/Hz$/, "Hz", 2],
  [/Ms$/, "ms", 2],
  [/Db$/, "dB", 2],
  [/Deg$/, "°", 3],
  [/M$/, "m", 1],
  [/S$/, "s", 1],
];

/** The unit read from a camelCase name's suffix ("lowCutHz" → "Hz", "smoothingM" → "m"), or null. */
export function unitOfName(name: string): { unit: string; stem: string } | null {
  for (const [re, unit, n] of NAME_UNITS) {
    if (re.test(name) && name.length > n && /[a-z0-9]/.test(name[name.length - n - 1])) return { unit, stem: name.slice(0, -n) };
  }
  return null;
}

/** Trade abbreviations kept in capitals. */
const ACRONYMS: Record<string, string> = { aic: "AIC", agc: "AGC", snr: "SNR", pml: "PML", rms: "RMS", fd: "FD", fwi: "FWI", psv: "P-SV", sh: "SH" };

/** "positionToleranceM" → "Position tolerance (m)"; "dtS" → "dt (s)"; "sp14" stays readable. */
export function readableName(name: string): { label: string; words: string; unit: string | null } {
  const u = unitOfName(name);
  const stem = u ? u.stem : name;
  const words = stem
    .replace(/([a-z0-9])([A-Z])/g, "$1 $2")
    .replace(/([A-Z]+)([A-Z][a-z])/g, "$1 $2")
    .split(" ")
    .map((w, i) => (i > 0 && /^[A-Z][a-z]/.test(w) ? w.toLowerCase() : w));
  const text = words.map((w) => ACRONYMS[w.toLowerCase()] ?? w).join(" ");
  const label = text.charAt(0).toUpperCase() + text.slice(1);
  return { label: u ? `${label} (${u.unit})` : label, words: label, unit: u?.unit ?? null };
}

/** The unit a description states: "… in Hz", "…, m", "(unit: ms)", "… ms after …"; null when none is found. */
export function unitOfDescription(description: string | undefined): string | null {
  if (!description) return null;
  const m = /\bunit:\s*([^),;]+)/i.exec(description) ?? /,\s*(Hz|ms|s|m|m\/s|dB|%|kg\/m³)\b/.exec(description) ?? /\bin (Hz|ms|m\/s|m|s|dB)\b/.exec(description);
  return m ? m[1].trim() : null;
}

/** A setting or summary value as text, numbers rounded, with the unit when it has one. */
export function formatSettingValue(v: unknown, unit: string | null): string {
  if (v === null) return "not set";
  if (v === undefined) return "—";
  // Seconds below one read better in milliseconds (a sample interval of 8.333e-5 s is 0.08333 ms).
  if (typeof v === "number" && unit === "s" && v !== 0 && Math.abs(v) < 1) return formatNumber(v * 1000, "ms");
  if (typeof v === "number") return formatNumber(v, unit);
  if (typeof v === "boolean") return v ? "yes" : "no";
  if (typeof v === "string") return v;
  if (Array.isArray(v) && v.every((x) => typeof x === "number")) return `${v.map((x) => formatNumber(x as number)).join(", ")}${unit ? ` ${unit}` : ""}`;
  if (Array.isArray(v) && v.every((x) => typeof x === "string")) return v.length ? v.join(", ") : "none";
  return JSON.stringify(v, (_k, x) => (typeof x === "number" && !Number.isInteger(x) ? Number(formatNumber(x).replace(/,/g, "")) : x));
}

/**
 * Any recorded value in words: objects as "Label value unit · …", arrays of objects one item
 * after another ("1: …; 2: …"), numbers rounded with the unit their key names. No raw JSON.
 */
export function formatReadable(v: unknown, unit: string | null = null): string {
  if (v === null || v === undefined || typeof v !== "object") return formatSettingValue(v, unit);
  if (Array.isArray(v)) {
    if (v.length === 0) return "none";
    if (v.every((x) => x === null || typeof x !== "object")) return formatSettingValue(v, unit);
    return v.map((x, i) => `${i + 1}: ${formatReadable(x)}`).join("; ");
  }
  const entries = Object.entries(v as Record<string, unknown>);
  if (entries.length === 0) return "nothing";
  return entries
    .map(([k, x]) => {
      const n = readableName(k);
      return `${n.words.toLowerCase()} ${formatReadable(x, n.unit)}`;
    })
    .join(" · ");
}
