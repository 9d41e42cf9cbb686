/** `tracewright resume` and `tracewright execute-run`: continue an unfinished run; execute a queued one. */
import type { Command } from "commander";
import { prepareResume } from "../../pipeline/run-create";
import { executeInTerminal } from "../execute";
import { action, openCliDb, parseId, resolveActor } from "../shared";

export function registerResume(program: Command): void {
  program
    .command("resume")
    .description("continue an interrupted, failed or cancelled run from its first unfinished step (or execute a queued one nobody picked up)")
    .argument("<run>", "run number")
    .option("--as <email>", "record who resumed it")
    .option("--json", "print the outcome as JSON")
    .action(
      action(async (run: string, opts: { as?: string; json?: boolean }) => {
        const db = openCliDb();
        const id = parseId(run, "run");
        prepareResume(db, id, resolveActor(db, opts.as, "cli", { doing: "resume runs" }));
        await executeInTerminal(db, id, opts);
      }),
    );
  program
    .command("execute-run")
    .description("execute a queued run (used by the control room and the watcher to hand runs to the engine)")
    .argument("<run>", "run number")
    .option("--json", "print the outcome as JSON")
    .action(
      action(async (run: string, opts: { json?: boolean }) => {
        const db = openCliDb();
        await executeInTerminal(db, parseId(run, "run"), { ...opts, quiet: true });
      }),
    );
}
