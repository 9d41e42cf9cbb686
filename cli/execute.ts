/** Executes a queued run in this process with terminal progress, Ctrl-C cancel and exit codes. */
import type { Db } from "../db/client";
import { getRun } from "../db/queries/runs";
import { deliverNotices } from "../pipeline/notice-sender";
import { executeRun } from "../pipeline/runner";
import { closeSharedWorkerPool } from "../pipeline/workers/pool";
import { closeSharedShotQueue } from "../pipeline/workers/shot-queue";
import { terminalProgress } from "./progress";
import { formatDuration, printJson } from "./shared";

export async function executeInTerminal(db: Db, runId: number, opts: { json?: boolean; verbose?: boolean; quiet?: boolean }) {
  const controller = new AbortController();
  let interrupts = 0;
  const onSigint = () => {
    interrupts++;
    if (interrupts === 1) {
      process.stderr.write("\ncancelling (finished steps are kept; Ctrl-C again to leave at once)...\n");
      controller.abort();
    } else {
      process.exit(130);
    }
  };
  process.on("SIGINT", onSigint);
  process.on("SIGTERM", onSigint);
  const progress = terminalProgress({
    interactive: Boolean(process.stderr.isTTY) && !opts.json,
    quiet: opts.quiet || opts.json,
    verbose: opts.verbose,
  });
  try {
    const outcome = await executeRun(db, runId, { signal: controller.signal, events: progress });
    progress.stop();
    const detail = getRun(db, runId);
    if (opts.json) {
      printJson({
        runId,
        status: outcome.status,
        error: outcome.error ?? null,
        steps: detail?.steps.map((s) => ({
          label: s.label,
          step: s.stepId,
          status: s.status,
          cacheHit: s.cacheHit,
          durationMs: s.durationMs,
          outputs: s.outputs,
        })),
      });
    } else {
      const total = detail?.startedAt && detail.finishedAt ? detail.finishedAt.getTime() - detail.startedAt.getTime() : null;
      const hits = detail?.steps.filter((s) => s.cacheHit).length ?? 0;
      process.stderr.write(
        `run ${runId} ${outcome.status} in ${formatDuration(total)}${hits ? ` (${hits} step${hits > 1 ? "s" : ""} from cache)` : ""}${outcome.error ? `: ${outcome.error}` : ""}\n`,
      );
    }
    process.exitCode = outcome.status === "succeeded" ? 0 : 1;
    return outcome;
  } finally {
    progress.stop();
    process.off("SIGINT", onSigint);
    process.off("SIGTERM", onSigint);
    await closeSharedWorkerPool();
    // The notices of the run's end (and any others waiting) go out now when mail is set up; the
    // web server's sender picks up whatever this could not send.
    const mail = await deliverNotices(db);
    if (mail.failed > 0 && !opts.quiet) process.stderr.write(`${mail.failed} mail notice(s) could not be sent; they stay in the outbox\n`);
    await closeSharedShotQueue();
  }
}
