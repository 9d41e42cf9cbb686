/**
 * The web server's clean-up of abandoned transfers: one pass at start-up, then every hour
 * (pipeline/upload-cleanup.ts). Started once per server process from instrumentation.ts (no
 * "server-only" import: the instrumentation layer is not a server-component layer). A failing
 * pass is logged and tried again at the next; it never stops the server.
 */
import { getDb } from "@/db/client";
import { cleanAbandonedTransfers } from "@/pipeline/upload-cleanup";

/** Time between passes, ms. Idleness is counted in hours, so an hour's delay is noise. */
export const UPLOAD_CLEANUP_INTERVAL_MS = 3_600_000;

let timer: NodeJS.Timeout | undefined;

function pass(): void {
  try {
    const done = cleanAbandonedTransfers(getDb());
    if (done.expired.length > 0 || done.removedFiles.length > 0) {
      console.log(`[uploads] clean-up: ${done.expired.length} transfer(s) expired after ${done.staleHours} h without a byte, ${done.removedFiles.length} file(s) removed (${done.freedBytes} bytes)`);
    }
  } catch (err) {
    console.error("[uploads] clean-up of abandoned transfers failed; tried again in an hour:", err);
  }
}

/** Runs a pass now and starts the hourly passes in this process (idempotent). */
export function startUploadCleanup(): void {
  if (timer) return;
  pass();
  timer = setInterval(pass, UPLOAD_CLEANUP_INTERVAL_MS);
  timer.unref();
}
