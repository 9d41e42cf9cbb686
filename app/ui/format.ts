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
