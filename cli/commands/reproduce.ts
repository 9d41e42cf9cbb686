/**
 * `tracewright reproduce`: execute a run again from its recorded inputs and settings in a
 * scratch data folder without the cache, and compare every artifact (pipeline/reproduce.ts).
 */
import type { Command } from "commander";
import { reproduceRun, type ReproductionReport } from "../../pipeline/reproduce";
import { DEFAULT_RELATIVE_TOLERANCE } from "../../pipeline/reproduce-compare";
import { closeSharedWorkerPool } from "../../pipeline/workers/pool";
import { getReproduction } from "../../db/queries/reproductions";
import { AppError } from "../../pipeline/errors";
import { action, formatDuration, openCliDb, parseId, printJson, resolveActor } from "../shared";

const VERDICT_WORDS: Record<ReproductionReport["verdict"], string> = {
  identical: "IDENTICAL: every artifact has its recorded hash",
  "within-tolerance": "WITHIN TOLERANCE: some arrays differ, none by more than the tolerance",
  different: "DIFFERENT",
  failed: "FAILED: the run could not be reproduced",
};

function printReport(r: ReproductionReport): void {
  const out = (s: string) => process.stdout.write(`${s}\n`);
  out(`reproduction ${r.reproductionId} of run ${r.runId}: ${VERDICT_WORDS[r.verdict]}${r.error ? `: ${r.error}` : ""}`);
  for (const s of r.steps) {
    const keyNote = s.cacheKeyMatches ? "" : "  settings, inputs or step version differ from the record";
    out(`  ${String(s.position + 1).padStart(2)}. ${s.label.padEnd(28)} ${s.outcome.padEnd(16)} ${formatDuration(s.durationMs)}${keyNote}`);
    for (const a of s.artifacts) {
      if (a.outcome === "identical") continue;
      const diff = a.maxRelativeDifference !== undefined ? ` max relative difference ${a.maxRelativeDifference.toExponential(2)} (absolute ${a.maxAbsoluteDifference?.toExponential(2)})` : "";
      out(`        ${a.kind} ${a.name}: ${a.outcome}${diff}${a.where ? ` at ${a.where}` : ""}${a.note ? `; ${a.note}` : ""}`);
    }
  }
  const c = r.counts;
  out(`  ${c.identical} identical, ${c["within-tolerance"]} within tolerance ${r.relativeTolerance}, ${c.different} different, ${c.missing} missing; ${formatDuration(r.durationMs)}`);
  if (r.scratchDir) out(`  scratch folder kept: ${r.scratchDir}`);
}

export function registerReproduce(program: Command): void {
  program
    .command("reproduce")
    .description("execute a succeeded run again from its recorded inputs and settings in a scratch folder, without the cache, and compare every artifact; exits 1 unless identical or within tolerance")
    .argument("<run>", "run number")
    .option("--tolerance <relative>", "largest relative difference accepted for numeric arrays where hashes differ", String(DEFAULT_RELATIVE_TOLERANCE))
    .option("--scratch <folder>", "scratch data folder (new or empty); default a new temporary folder")
    .option("--keep-scratch", "keep the scratch folder afterwards")
    .option("--reproduction <id>", "carry out a reproduction already requested in the control room")
    .option("--as <email>", "record who asked for it")
    .option("--json", "print the report as JSON")
    .action(
      action(async (run: string, opts: { tolerance: string; scratch?: string; keepScratch?: boolean; reproduction?: string; as?: string; json?: boolean }) => {
        const db = openCliDb();
        const tolerance = Number(opts.tolerance);
        if (!Number.isFinite(tolerance) || tolerance < 0) throw new AppError("bad-input", `--tolerance must be a number ≥ 0, got "${opts.tolerance}"`, { field: "--tolerance" });
        // A reproduction requested in the control room is carried out for the person who asked.
        const requested = opts.reproduction ? getReproduction(db, parseId(opts.reproduction, "--reproduction")) : null;
        if (opts.reproduction && !requested) throw new AppError("not-found", `No reproduction ${opts.reproduction}`, { field: "--reproduction" });
        const actor = requested
          ? { userId: requested.requestedByUserId, label: requested.requestedByLabel, door: requested.door }
          : resolveActor(db, opts.as, "cli", { doing: "reproduce runs", roles: ["admin", "lead", "auditor"] });
        const interactive = Boolean(process.stderr.isTTY) && !opts.json;
        let lastMessage = "";
        try {
          const report = await reproduceRun(db, parseId(run, "run"), {
            actor,
            relativeTolerance: tolerance,
            scratchDir: opts.scratch,
            keepScratch: opts.keepScratch,
            reproductionId: requested?.id,
            // The same program executes the reproduction (it has the same steps registered).
            engineEntry: process.argv[1]?.endsWith(".ts") ? process.argv[1] : undefined,
            onProgress: (fraction, message) => {
              if (opts.json || message === lastMessage) return;
              lastMessage = message;
              process.stderr.write(`${interactive ? "\r\x1b[2K" : ""}reproducing: ${Math.round(fraction * 100)}% ${message}${interactive ? "" : "\n"}`);
            },
          });
          if (interactive) process.stderr.write("\n");
          if (opts.json) printJson(report);
          else printReport(report);
          process.exitCode = report.verdict === "identical" || report.verdict === "within-tolerance" ? 0 : 1;
        } finally {
          await closeSharedWorkerPool();
        }
      }),
    );
}
