/** `tracewright watch`: run a pipeline on every field folder copied into a root folder. */
import type { Command } from "commander";
import { watchFieldFolders } from "../../pipeline/watch";
import { closeSharedWorkerPool, sharedWorkerPool } from "../../pipeline/workers/pool";
import { closeSharedShotQueue } from "../../pipeline/workers/shot-queue";
import { terminalProgress } from "../progress";
import { action, openCliDb, resolveActor } from "../shared";
import { AppError } from "../../pipeline/errors";
import { fieldCheckOfRun, sendFieldCheckMail } from "../../pipeline/field-check-mail";

export function registerWatch(program: Command): void {
  program
    .command("watch")
    .description(
      "watch a folder; each folder of field files copied in (or the folder itself) runs the pipeline once it is complete: a READY marker, every file its geometry table names, or a long quiet period",
    )
    .argument("<folder>", "root folder the crew copies field folders into")
    .requiredOption("--pipeline <file>", "pipeline file to run on each field folder")
    .option("--quiet-seconds <s>", "run a folder that does not look complete after this long without changes (slow copies need minutes)", "120")
    .option("--settle-seconds <s>", "run a complete folder (marker present, or every file of its geometry table) after this long without changes", "3")
    .option("--ready-marker <name>", "file name the crew drops into a folder when its copy is complete", "READY")
    .option("--polling", "poll the file system (for network shares)")
    .option("--as <email>", "record runs as started by this user (default: watcher)")
    .option("--mail-field-lead <email>", "after a run with a field-check step, mail this address when something needs a reshoot (SMTP from TRACEWRIGHT_SMTP_HOST)")
    .action(
      action(async (folder: string, opts: { pipeline: string; quietSeconds: string; settleSeconds: string; readyMarker: string; polling?: boolean; as?: string; mailFieldLead?: string }) => {
        const seconds = (value: string, option: string) => {
          const n = Number(value);
          if (!Number.isFinite(n) || n < 0) throw new AppError("bad-input", `${option}: expected a number of seconds >= 0, got "${value}"`, { field: option });
          return n;
        };
        const quiet = seconds(opts.quietSeconds, "--quiet-seconds");
        const settle = seconds(opts.settleSeconds, "--settle-seconds");
        const db = openCliDb();
        const actor = opts.as ? resolveActor(db, opts.as, "watcher") : { userId: null, label: "watcher", door: "watcher" as const };
        const mails: Array<Promise<unknown>> = [];
        const progress = terminalProgress({ interactive: Boolean(process.stderr.isTTY), verbose: false });
        const watcher = watchFieldFolders(db, {
          root: folder,
          pipelinePath: opts.pipeline,
          quietMs: quiet * 1000,
          settleMs: settle * 1000,
          readyMarker: opts.readyMarker,
          usePolling: opts.polling,
          actor,
          pool: sharedWorkerPool(),
          runEvents: progress,
          onNotice: (n) =>
            process.stderr.write(`${new Date().toISOString().slice(11, 19)} ${n.event.padEnd(12)} ${n.folder}${n.file ? `/${n.file}` : ""}: ${n.reason}\n`),
          onRunFinished: (o) => {
            process.stderr.write(`run ${o.runId} ${o.status}${o.error ? `: ${o.error}` : ""}\n`);
            const to = opts.mailFieldLead;
            if (!to || o.status !== "succeeded") return;
            const report = fieldCheckOfRun(db, o.runId);
            if (!report) return;
            mails.push(
              sendFieldCheckMail({ to, report, folder: o.folder, runId: o.runId }).then((m) =>
                process.stderr.write(m.sent ? `mailed ${to}: ${m.subject}\n` : `no mail to ${to}: ${m.reason}\n`),
              ),
            );
          },
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
        await Promise.allSettled(mails);
        await closeSharedWorkerPool();
        await closeSharedShotQueue();
      }),
    );
}
