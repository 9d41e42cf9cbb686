/** `tracewright report`: the client report of an approved run as a PDF (stored as an artifact too). */
import fs from "node:fs";
import path from "node:path";
import type { Command } from "commander";
import { AppError } from "../../pipeline/errors";
import { createReport } from "../../pipeline/report/create";
import { action, openCliDb, parseId, printJson, resolveActor } from "../shared";

/** "10, 20.5,30" → [10, 20.5, 30]; a clear error naming the option otherwise. */
export function parsePositions(value: string, option: string): number[] {
  const parts = value.split(",").map((s) => s.trim()).filter(Boolean);
  const out = parts.map(Number);
  const bad = parts.find((p, i) => !Number.isFinite(out[i]));
  if (bad !== undefined || out.length === 0) {
    throw new AppError("bad-input", `${option} ${value}: expected positions along the profile in metres separated by commas, e.g. 10,20,30`, { field: option });
  }
  return out;
}

export function registerReport(program: Command): void {
  program
    .command("report")
    .description("write the client report of an approved run as a PDF (stored and recorded as well)")
    .argument("<run>", "run number (approved, with a waveform inversion)")
    .requiredOption("--out <file>", "PDF file to write")
    .option("--positions <m,...>", "positions along the profile for the depth profiles, m (default: a quarter, half and three quarters along the spread)")
    .option("--shots <id,...>", "shots shown observed against synthetic, by gather id (default: the first and the middle shot)")
    .option("--as <user>", "who makes the report (a lead or administrator; default TRACEWRIGHT_USER or the OS user)")
    .option("--force", "replace the file if it exists")
    .option("--json", "print the result as JSON")
    .action(
      action(async (run: string, opts: { out: string; positions?: string; shots?: string; as?: string; force?: boolean; json?: boolean }) => {
        const db = openCliDb();
        const id = parseId(run, "run");
        const actor = resolveActor(db, opts.as, "cli", { doing: "make client reports", roles: ["lead", "admin"] });
        const out = path.resolve(opts.out);
        const dir = path.dirname(out);
        if (!fs.existsSync(dir) || !fs.statSync(dir).isDirectory()) throw new AppError("bad-input", `--out ${opts.out}: the folder ${dir} does not exist`, { field: "--out" });
        if (fs.existsSync(out) && fs.statSync(out).isDirectory()) throw new AppError("bad-input", `--out ${opts.out}: is a folder; give a file name`, { field: "--out" });
        if (fs.existsSync(out) && !opts.force) throw new AppError("conflict", `${out} exists; pass --force to replace it`);
        const report = await createReport(db, id, actor, {
          profilePositionsM: opts.positions ? parsePositions(opts.positions, "--positions") : undefined,
          fitShots: opts.shots ? opts.shots.split(",").map((s) => s.trim()).filter(Boolean) : undefined,
        });
        // Write beside the target and rename: never a half-written file under the target's name.
        const tmp = `${out}.${process.pid}.tmp`;
        try {
          fs.writeFileSync(tmp, report.pdf);
          fs.renameSync(tmp, out);
        } finally {
          fs.rmSync(tmp, { force: true });
        }
        const { pdf: _pdf, ...record } = report;
        if (opts.json) printJson({ ...record, file: out });
        else {
          process.stdout.write(
            `wrote the report of run ${id} to ${out}: ${report.pages} pages, ${(report.bytes / 1024).toFixed(0)} KiB, made in ${(report.generationMs / 1000).toFixed(2)} s\n` +
              `  stored as artifact ${report.hash}\n  fingerprint ${report.fingerprint}\n`,
          );
        }
      }),
    );
}
