/** `tracewright rerun`: a new run from a step of an earlier one, with changed settings. */
import type { Command } from "commander";
import { parse as parseYaml } from "yaml";
import { AppError } from "../../pipeline/errors";
import { createRun } from "../../pipeline/run-create";
import { executeInTerminal } from "../execute";
import { action, openCliDb, parseId, resolveActor } from "../shared";

/** Parses `label.setting=value` (value as YAML: numbers, booleans, lists). */
export function parseOverride(text: string, into: Record<string, Record<string, unknown>>): Record<string, Record<string, unknown>> {
  const m = /^([a-z][a-z0-9-]*)\.([A-Za-z][A-Za-z0-9.]*)=(.*)$/s.exec(text);
  if (!m) {
    throw new AppError("bad-input", `--set ${text}: expected <step label>.<setting>=<value>, e.g. frequency-filter.highCutHz=80`, {
      field: "--set",
      expected: "<step label>.<setting>=<value>",
    });
  }
  const [, label, dotted, raw] = m;
  let value: unknown;
  try {
    value = raw === "" ? "" : parseYaml(raw);
  } catch {
    value = raw;
  }
  // A dotted path sets one part of a setting that holds an object: grid.depthM=30.
  const keys = dotted.split(".");
  if (keys.some((k) => k === "")) {
    throw new AppError("bad-input", `--set ${text}: empty name in "${dotted}"`, { field: "--set", expected: "<step label>.<setting>[.<part>]=<value>" });
  }
  for (let i = keys.length - 1; i > 0; i--) value = { [keys[i]]: value };
  // Own properties only: a label such as "constructor" must not reach Object's prototype.
  const step = Object.hasOwn(into, label) ? into[label] : (into[label] = {});
  const first = keys[0];
  const prev = step[first];
  step[first] =
    keys.length > 1 && prev && typeof prev === "object" && !Array.isArray(prev)
      ? { ...(prev as Record<string, unknown>), ...(value as Record<string, unknown>) }
      : value;
  return into;
}

export function registerRerun(program: Command): void {
  program
    .command("rerun")
    .description("rerun an earlier run from one of its steps with changed settings; unchanged upstream steps come from the cache")
    .argument("<run>", "run number")
    .requiredOption("--from <step-label>", "the first step whose settings may change")
    .option("--set <label.setting=value>", "a changed setting (repeatable)", (v: string, acc: string[]) => [...acc, v], [] as string[])
    .option("--as <email>", "record the rerun as started by this user")
    .option("--json", "print the outcome as JSON")
    .option("--verbose", "print every log line")
    .action(
      action(async (run: string, opts: { from: string; set: string[]; as?: string; json?: boolean; verbose?: boolean }) => {
        const db = openCliDb();
        const actor = resolveActor(db, opts.as);
        const overrides = opts.set.reduce((acc, s) => parseOverride(s, acc), {} as Record<string, Record<string, unknown>>);
        const { runId } = createRun(db, { source: "rerun", parentRunId: parseId(run, "run"), fromLabel: opts.from, overrides, actor });
        if (!opts.json) process.stderr.write(`rerun of run ${run} from ${opts.from} as run ${runId}\n`);
        await executeInTerminal(db, runId, opts);
      }),
    );
}
