/** `tracewright worker`: serve shot tasks from the Redis job queue (TRACEWRIGHT_REDIS_URL) until stopped. */
import fs from "node:fs";
import type { Command } from "commander";
import { dataDir } from "../../db/paths";
import { AppError } from "../../pipeline/errors";
import { startShotWorker } from "../../pipeline/workers/queue-worker";
import { queueSettingsFromEnv } from "../../pipeline/workers/shot-queue";
import { action } from "../shared";

function wholeNumber(text: string, flag: string, min: number, max: number): number {
  const n = Number(text);
  if (!Number.isInteger(n) || n < min || n > max) throw new AppError("bad-input", `${flag} ${text}: expected a whole number from ${min} to ${max}`, { field: flag });
  return n;
}

export function registerWorker(program: Command): void {
  program
    .command("worker")
    .description("take shot tasks (forward solves, per-shot gradients) from the job queue at TRACEWRIGHT_REDIS_URL; inputs and results go through the data folder, which must be the coordinator's (a shared file system)")
    .option("--concurrency <n>", "tasks at once (one worker thread each)", "1")
    .option("--lock-ms <n>", "a task's lock lasts this long without renewal; a killed worker's task goes to another worker after it", "30000")
    .option("--cache-mb <n>", "inputs kept in memory, MB", "512")
    .option("--quiet", "print nothing per task")
    .action(
      action(async (opts: { concurrency: string; lockMs: string; cacheMb: string; quiet?: boolean }) => {
        const settings = queueSettingsFromEnv();
        if (!settings) throw new AppError("bad-input", "TRACEWRIGHT_REDIS_URL is not set: a worker needs the queue's Redis URL, e.g. redis://coordinator:6379", { field: "TRACEWRIGHT_REDIS_URL" });
        const concurrency = wholeNumber(opts.concurrency, "--concurrency", 1, 256);
        const lockDurationMs = wholeNumber(opts.lockMs, "--lock-ms", 200, 3_600_000);
        const cacheMb = wholeNumber(opts.cacheMb, "--cache-mb", 0, 1_000_000);
        const folder = dataDir();
        if (!fs.existsSync(folder)) throw new AppError("not-found", `The data folder ${folder} does not exist: point TRACEWRIGHT_DATA_DIR at the coordinator's (shared) data folder`, { field: "TRACEWRIGHT_DATA_DIR" });
        const log = (s: string) => process.stderr.write(`${new Date().toISOString().slice(11, 23)} ${s}\n`);
        const worker = await startShotWorker({
          settings,
          concurrency,
          lockDurationMs,
          cacheBytes: cacheMb * 1024 * 1024,
          onEvent: opts.quiet
            ? undefined
            : (e) => log(`${e.kind.padEnd(9)} ${e.jobId}${e.ms !== undefined ? ` ${e.ms.toFixed(0)} ms` : ""}${e.message ? `: ${e.message}` : ""}`),
        });
        log(`worker ${worker.id} serving ${settings.url}, data folder ${folder}, ${concurrency} at once (Ctrl-C to stop)`);
        await new Promise<void>((resolve) => {
          process.once("SIGINT", resolve);
          process.once("SIGTERM", resolve);
        });
        log("stopping: finishing the running tasks...");
        await worker.close();
        log(`stopped after ${worker.record.tasksDone} tasks`);
        // A connection still trying to reach a Redis that went away would keep the process up.
        process.exit(0);
      }),
    );
}
