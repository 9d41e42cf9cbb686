/**
 * `tracewright uploads clean`: expire transfers of field files that received no byte for
 * TRACEWRIGHT_UPLOAD_STALE_HOURS (24 by default) and remove their partial files, as the web server
 * does at start-up and every hour (pipeline/upload-cleanup.ts).
 *
 *   tracewright uploads clean [--stale-hours <h>] [--as <email>] [--json]
 */
import type { Command } from "commander";
import { AppError } from "../../pipeline/errors";
import { cleanAbandonedTransfers, staleTransferHours } from "../../pipeline/upload-cleanup";
import { formatBytes } from "../../pipeline/uploads";
import { action, openCliDb, printJson, resolveActor } from "../shared";

export function registerUploads(program: Command): void {
  const uploads = program.command("uploads").description("field files sent from the browser");
  uploads
    .command("clean")
    .description("expire transfers that received no byte for --stale-hours and remove their partial files (audited); also removes transfer files nothing receives into any more")
    .option("--stale-hours <h>", "hours without a byte after which a transfer is abandoned (default TRACEWRIGHT_UPLOAD_STALE_HOURS, else 24)")
    .option("--as <email>", "who cleans up, for the audit trail (default TRACEWRIGHT_USER, else the OS login)")
    .option("--json", "print what was done as JSON")
    .action(
      action(async (opts: { staleHours?: string; as?: string; json?: boolean }) => {
        let staleHours = staleTransferHours();
        if (opts.staleHours !== undefined) {
          staleHours = Number(opts.staleHours);
          if (!Number.isFinite(staleHours) || staleHours <= 0) throw new AppError("bad-input", `--stale-hours must be a positive number of hours, got "${opts.staleHours}"`, { field: "--stale-hours" });
        }
        const db = openCliDb();
        const actor = resolveActor(db, opts.as, "cli", { doing: "clean up uploads" });
        const done = cleanAbandonedTransfers(db, { staleHours, actor });
        if (opts.json) {
          printJson(done);
          return;
        }
        for (const e of done.expired) {
          process.stdout.write(`expired: upload ${e.sessionId}, ${e.name} (${formatBytes(e.receivedBytes)} of ${formatBytes(e.sizeBytes)} had arrived; idle ${e.idleHours} h)\n`);
        }
        process.stdout.write(
          `${done.expired.length} transfer${done.expired.length === 1 ? "" : "s"} expired (no byte for ${staleHours} h), ${done.removedFiles.length} file${done.removedFiles.length === 1 ? "" : "s"} removed, ${formatBytes(done.freedBytes)} freed\n`,
        );
      }),
    );
}
