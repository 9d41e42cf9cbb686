/**
 * The tracewright command line: assembles the commands. Each command lives in
 * cli/commands/<verb>.ts.
 */
import { Command } from "commander";
import { registerAudit } from "./commands/audit";
import { registerBench } from "./commands/bench";
import { registerCancel } from "./commands/cancel";
import { registerExport } from "./commands/export";
import { registerMigrate } from "./commands/migrate";
import { registerReport } from "./commands/report";
import { registerRerun } from "./commands/rerun";
import { registerReproduce } from "./commands/reproduce";
import { registerResume } from "./commands/resume";
import { registerRun } from "./commands/run";
import { registerRuns } from "./commands/runs";
import { registerSteps } from "./commands/steps";
import { registerSurveys } from "./commands/surveys";
import { registerUploads } from "./commands/uploads";
import { registerUsers } from "./commands/users";
import { registerWatch } from "./commands/watch";
import { registerWorker } from "./commands/worker";
import { registerWorkers } from "./commands/workers";
import { closeDb } from "../db/client";

const program = new Command()
  .name("tracewright")
  .description("Near-surface seismic processing: cached pipelines on folders of field records, recorded in SQLite.")
  .version("0.1.0")
  .showHelpAfterError("(run with --help for usage)")
  .configureOutput({ writeErr: (s) => process.stderr.write(s) })
  .exitOverride((err) => {
    // Usage errors exit 2; help and version exit 0.
    process.exit(err.code === "commander.helpDisplayed" || err.code === "commander.version" ? 0 : 2);
  });

registerRun(program);
registerRerun(program);
registerResume(program);
registerReproduce(program);
registerCancel(program);
registerRuns(program);
registerWatch(program);
registerSteps(program);
registerExport(program);
registerReport(program);
registerSurveys(program);
registerUploads(program);
registerUsers(program);
registerMigrate(program);
registerBench(program);
registerAudit(program);
registerWorker(program);
registerWorkers(program);

await program.parseAsync(process.argv);
closeDb();
