/** `tracewright migrate`: create or update the database. */
import type { Command } from "commander";
import { databasePath } from "../../db/paths";
import { action, openCliDb } from "../shared";

export function registerMigrate(program: Command): void {
  program
    .command("migrate")
    .description("create or update the SQLite database (every command also does this at start)")
    .action(
      action(async () => {
        openCliDb();
        process.stdout.write(`database ready at ${databasePath()}\n`);
      }),
    );
}
