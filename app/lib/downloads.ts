/** File names and links of the control room's downloads (step results, audit trails). */

const EXTENSIONS = { segy: "sgy", csv: "csv", json: "json" } as const;

/** "run-12-vertical-stack-gathers.sgy": safe in a Content-Disposition header on every platform. */
export function downloadName(runId: number, label: string, slot: string, format: keyof typeof EXTENSIONS): string {
  const safe = (s: string) => s.replace(/[^A-Za-z0-9._-]+/g, "-").replace(/^-+|-+$/g, "") || "result";
  return `run-${runId}-${safe(label)}-${safe(slot)}.${EXTENSIONS[format]}`;
}

/** The format a slot's download comes in, by the slot's usual content. */
export function formatOfSlot(slot: string): keyof typeof EXTENSIONS {
  return slot === "gathers" || slot === "synthetic" ? "segy" : slot === "model" ? "csv" : "json";
}

/** Link to download one result of a step. */
export function stepDownloadHref(runId: number, label: string, slot: string): string {
  return `/api/runs/${runId}/steps/${encodeURIComponent(label)}/download?slot=${encodeURIComponent(slot)}`;
}
