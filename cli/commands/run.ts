/** `tracewright run`: run a pipeline file on its field folder (or another). */
import type { Command } from "commander";
import { createRun } from "../../pipeline/run-create";
import { executeInTerminal } from "../execute";
import { action, openCliDb, resolveActor } from "../shared";

export function registerRun(program: Command): void {
  program
    .command("run")
    .description("run a pipeline file on its field-data folder and record every step")
    .argument("<pipeline-file>", "pipeline file (YAML)")
    .option("--field-data <folder>", "use this folder of field files instead of the one the pipeline file names")
    .option("--as <email>", "record the run as started by this user (default: TRACEWRIGHT_USER or the OS user)")
    .option("--json", "print the outcome as JSON")
    .option("--verbose", "print every log line")
    .action(
      action(async (file: string, opts: { fieldData?: string; as?: string; json?: boolean; verbose?: boolean }) => {
        const db = openCliDb();
        const actor = resolveActor(db, opts.as);
        const prepared = createRun(db, { source: "pipeline-file", pipelinePath: file, fieldDataOverride: opts.fieldData, actor });
        if (!opts.json) {
          process.stderr.write(
            `${prepared.resolved.name} v${prepared.pipelineVersion} on ${prepared.dataset.folderPath || "(no field data)"} (${prepared.dataset.fileCount} files, ${prepared.dataset.contentHash.slice(0, 12)})\n`,
          );
        }
        await executeInTerminal(db, prepared.runId, opts);
      }),
    );
}
