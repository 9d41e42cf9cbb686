/** `tracewright steps`: the available steps with their settings, defaults and units. */
import type { Command } from "commander";
import { describeParams, getStep, listSteps } from "../../pipeline/registry";
import { action, printJson } from "../shared";

export function registerSteps(program: Command): void {
  program
    .command("steps")
    .description("list the processing steps with their settings, defaults and units")
    .argument("[step]", "show only this step")
    .option("--json", "print JSON with stable keys")
    .action(
      action(async (only: string | undefined, opts: { json?: boolean }) => {
        const steps = listSteps().filter((s) => !only || s.id === only);
        if (opts.json) {
          printJson(
            steps.map((s) => ({
              id: s.id,
              version: s.version,
              title: s.title,
              description: s.description,
              reads: s.reads,
              optionalReads: s.optionalReads ?? [],
              writes: s.writes,
              settings: describeParams(s),
            })),
          );
          return;
        }
        if (only && steps.length === 0) getStep(only); // throws: unknown step, with the valid ones
        for (const s of steps) {
          process.stdout.write(`${s.id} (v${s.version}): ${s.title}\n`);
          process.stdout.write(`  reads ${s.reads.join(", ") || "-"}${s.optionalReads?.length ? ` (optional: ${s.optionalReads.join(", ")})` : ""}; writes ${s.writes.join(", ")}\n`);
          for (const p of describeParams(s)) {
            const def = p.default === undefined ? "" : ` = ${JSON.stringify(p.default)}`;
            const choices = p.choices ? ` [${p.choices.join(" | ")}]` : "";
            process.stdout.write(`    ${p.name}${def}${choices}  ${p.description}\n`);
          }
          process.stdout.write("\n");
        }
      }),
    );
}
