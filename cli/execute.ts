/** Executes a queued run in this process with terminal progress, Ctrl-C cancel and exit codes. */
import type { Db } from "../db/client";
import { getRun } from "../db/queries/runs";
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
    await closeSharedShotQueue();
  }
}
