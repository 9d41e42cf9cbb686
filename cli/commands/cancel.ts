/** `tracewright cancel`: ask a queued or running run to stop. */
import type { Command } from "commander";
import { requestCancel } from "../../pipeline/run-create";
import { action, openCliDb, parseId, resolveActor } from "../shared";

export function registerCancel(program: Command): void {
  program
    .command("cancel")
    .description("ask a queued or running run to stop; finished steps are kept")
    .argument("<run>", "run number")
    .option("--as <email>", "record who cancelled it")
    .action(
      action(async (run: string, opts: { as?: string }) => {
        const db = openCliDb();
        requestCancel(db, parseId(run, "run"), resolveActor(db, opts.as, "cli", { doing: "cancel runs" }));
        process.stderr.write(`cancel requested for run ${run}\n`);
      }),
    );
}
