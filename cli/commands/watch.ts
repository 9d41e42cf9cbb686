/** `tracewright watch`: run a pipeline on every field folder copied into a root folder. */
import type { Command } from "commander";
import { watchFieldFolders } from "../../pipeline/watch";
import { closeSharedWorkerPool, sharedWorkerPool } from "../../pipeline/workers/pool";
import { terminalProgress } from "../progress";
import { action, openCliDb, resolveActor } from "../shared";
import { AppError } from "../../pipeline/errors";

export function registerWatch(program: Command): void {
  program
    .command("watch")
    .description("watch a folder; each folder of field files copied in (or the folder itself) runs the pipeline once its files stop changing")
    .argument("<folder>", "root folder the crew copies field folders into")
    .requiredOption("--pipeline <file>", "pipeline file to run on each field folder")
    .option("--quiet-seconds <s>", "wait this long after the last change before running", "3")
    .option("--polling", "poll the file system (for network shares)")
    .option("--as <email>", "record runs as started by this user (default: watcher)")
    .action(
      action(async (folder: string, opts: { pipeline: string; quietSeconds: string; polling?: boolean; as?: string }) => {
        const quiet = Number(opts.quietSeconds);
        if (!Number.isFinite(quiet) || quiet < 0) {
          throw new AppError("bad-input", `--quiet-seconds: expected a number of seconds >= 0, got "${opts.quietSeconds}"`, { field: "--quiet-seconds" });
        }
        const db = openCliDb();
        const actor = opts.as ? resolveActor(db, opts.as, "watcher") : { userId: null, label: "watcher", door: "watcher" as const };
        const progress = terminalProgress({ interactive: Boolean(process.stderr.isTTY), verbose: false });
        const watcher = watchFieldFolders(db, {
          root: folder,
          pipelinePath: opts.pipeline,
          quietMs: quiet * 1000,
          usePolling: opts.polling,
          actor,
          pool: sharedWorkerPool(),
          runEvents: progress,
          onNotice: (n) =>
            process.stderr.write(`${new Date().toISOString().slice(11, 19)} ${n.event.padEnd(12)} ${n.folder}${n.file ? `/${n.file}` : ""}: ${n.reason}\n`),
          onRunFinished: (o) => process.stderr.write(`run ${o.runId} ${o.status}${o.error ? `: ${o.error}` : ""}\n`),
        });
        await watcher.ready;
        process.stderr.write(`watching ${folder} (Ctrl-C to stop)\n`);
        await new Promise<void>((resolve) => {
          const stop = () => resolve();
          process.once("SIGINT", stop);
          process.once("SIGTERM", stop);
        });
        process.stderr.write("stopping the watcher...\n");
        await watcher.close();
        await closeSharedWorkerPool();
      }),
    );
}
