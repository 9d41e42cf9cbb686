/** `tracewright workers`: the queue workers registered in Redis, and a run's shot tasks. */
import type { Command } from "commander";
import { AppError } from "../../pipeline/errors";
import { listWorkers, WORKER_SILENT_AFTER_MS } from "../../pipeline/workers/queue-worker";
import { listRunShotTasks, openShotQueue, queueSettingsFromEnv } from "../../pipeline/workers/shot-queue";
import { action, parseId, printJson } from "../shared";

function ago(ms: number): string {
  const s = Math.max(0, Math.round(ms / 1000));
  return s < 120 ? `${s} s ago` : `${Math.round(s / 60)} min ago`;
}

export function registerWorkers(program: Command): void {
  program
    .command("workers")
    .description("list the queue workers (host, tasks done, current task, last heard), or with --run the shot tasks of a run")
    .option("--run <id>", "list this run's shot tasks instead (by step, batch and shot)")
    .option("--json", "print JSON with stable keys")
    .action(
      action(async (opts: { run?: string; json?: boolean }) => {
        const settings = queueSettingsFromEnv();
        if (!settings) throw new AppError("bad-input", "TRACEWRIGHT_REDIS_URL is not set: without a job queue every shot runs in the local pool, and there are no workers to list", { field: "TRACEWRIGHT_REDIS_URL" });
        const queue = await openShotQueue(settings);
        try {
          if (opts.run) {
            const rows = await listRunShotTasks(queue, parseId(opts.run, "--run"));
            if (opts.json) return printJson({ tasks: rows });
            if (rows.length === 0) return void process.stdout.write(`no shot tasks of run ${opts.run} on the queue (finished tasks are kept a day)\n`);
            process.stdout.write(`${"step".padEnd(22)} ${"batch".padEnd(36)} ${"shot".padEnd(12)} ${"state".padEnd(10)} tries stalls ${"worker".padEnd(24)} ms\n`);
            for (const r of rows) {
              process.stdout.write(
                `${r.step.padEnd(22)} ${r.batch.padEnd(36)} ${r.shotId.padEnd(12)} ${r.state.padEnd(10)} ${String(r.attemptsMade).padStart(5)} ${String(r.stalls).padStart(6)} ${(r.worker ?? "-").padEnd(24)} ${r.computeMs ?? "-"}${r.failedReason ? `  ${r.failedReason}` : ""}\n`,
              );
            }
            return;
          }
          const workers = await listWorkers(await queue.redis());
          const now = Date.now();
          if (opts.json) return printJson({ workers: workers.map((w) => ({ ...w, silent: now - w.lastHeardAt > WORKER_SILENT_AFTER_MS })) });
          if (workers.length === 0) return void process.stdout.write(`no workers registered at ${settings.url}; start one with: tracewright worker\n`);
          process.stdout.write(`${"host".padEnd(20)} ${"pid".padStart(7)} ${"at once".padStart(7)} ${"done".padStart(6)} ${"failed".padStart(6)} ${"last heard".padEnd(16)} current task\n`);
          for (const w of workers) {
            const silent = now - w.lastHeardAt > WORKER_SILENT_AFTER_MS;
            process.stdout.write(
              `${w.host.padEnd(20)} ${String(w.pid).padStart(7)} ${String(w.concurrency).padStart(7)} ${String(w.tasksDone).padStart(6)} ${String(w.tasksFailed).padStart(6)} ${(ago(now - w.lastHeardAt) + (silent ? " (silent)" : "")).padEnd(16)} ${w.currentTasks.join(", ") || "-"}\n`,
            );
          }
        } finally {
          await queue.close();
        }
      }),
    );
}
