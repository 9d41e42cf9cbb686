/** `tracewright bench`: speed figures of the readers, signal steps and solver. */
import type { Command } from "commander";
import { action, printJson } from "../shared";

export function registerBench(program: Command): void {
  program
    .command("bench")
    .description("measure and print speed figures (readers, signal steps, solver)")
    .option("--only <part>", "readers, signal or solver")
    .option("--json", "print JSON")
    .action(
      action(async (opts: { only?: string; json?: boolean }) => {
        const results: Record<string, unknown> = {};
        if (!opts.only || opts.only === "readers") {
          const { benchReaders } = await import("../../pipeline/bench/io");
          results.readers = await benchReaders();
          if (!opts.json) process.stdout.write(`readers: ${JSON.stringify(results.readers)}\n`);
        }
        if (opts.json) printJson(results);
      }),
    );
}
