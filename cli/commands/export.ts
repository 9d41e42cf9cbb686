/** `tracewright export`: write an artifact as SEG-Y (gathers), CSV (models) or JSON. */
import fs from "node:fs";
import path from "node:path";
import type { Command } from "commander";
import { getRun } from "../../db/queries/runs";
import { listIntermediates } from "../../db/queries/intermediates";
import { readArtifact } from "../../pipeline/artifact-store";
import { AppError } from "../../pipeline/errors";
import { exportArtifact, exportFormatOf, type ExportFormat } from "../../pipeline/export";
import { action, openCliDb, parseId } from "../shared";

export function registerExport(program: Command): void {
  program
    .command("export")
    .description("write a result as a file: gathers as SEG-Y rev 2.0, models as CSV, anything else as JSON")
    .argument("<run>", "run number")
    .requiredOption("--step <label>", "the step whose output to write")
    .option("--slot <slot>", "which output of the step (default: gathers, synthetic or model, whichever it wrote)")
    .requiredOption("--out <file>", "file to write")
    .option("--format <format>", "segy, csv or json (default: by the kind of result)")
    .option("--iteration <n>", "a step that records iterations (waveform-inversion): the model after iteration n instead of its result")
    .option("--force", "replace the file if it exists")
    .action(
      action(async (run: string, opts: { step: string; slot?: string; out: string; format?: string; force?: boolean; iteration?: string }) => {
        const db = openCliDb();
        const id = parseId(run, "run");
        const detail = getRun(db, id);
        if (!detail) throw new AppError("not-found", `Run ${id} does not exist`);
        const step = detail.steps.find((s) => s.label === opts.step);
        if (!step) {
          throw new AppError("bad-input", `--step ${opts.step}: run ${id} has no such step; its steps: ${detail.steps.map((s) => s.label).join(", ")}`, {
            field: "--step",
          });
        }
        let slot: string;
        let hash: string | undefined;
        if (opts.iteration !== undefined) {
          // An iteration's model, recorded while the step ran (it may still be running).
          const n = parseId(opts.iteration, "iteration");
          const models = listIntermediates(db, step.id).filter((r) => r.kind === (opts.slot ?? "model"));
          if (models.length === 0) {
            throw new AppError("bad-input", `--iteration: step ${opts.step} of run ${id} recorded no ${opts.slot ?? "model"} per iteration`, { field: "--iteration" });
          }
          const found = models.find((r) => r.index === n);
          if (!found) {
            throw new AppError("bad-input", `--iteration ${n}: step ${opts.step} recorded iterations ${models[0].index} to ${models[models.length - 1].index}`, {
              field: "--iteration",
            });
          }
          slot = `${found.kind} after iteration ${n}`;
          hash = found.artifactHash;
        } else {
          const slots = Object.keys(step.outputs);
          if (slots.length === 0) throw new AppError("conflict", `Step ${opts.step} of run ${id} has no results (${step.status})`);
          slot = opts.slot ?? ["gathers", "synthetic", "model"].find((s) => slots.includes(s)) ?? slots[0];
          hash = step.outputs[slot];
          if (!hash) throw new AppError("bad-input", `--slot ${slot}: step ${opts.step} wrote ${slots.join(", ")}`, { field: "--slot", choices: slots });
        }
        if (opts.format && !["segy", "csv", "json"].includes(opts.format)) {
          throw new AppError("bad-input", `--format ${opts.format}: expected segy, csv or json`, { field: "--format" });
        }
        const value = await readArtifact(hash);
        const format = (opts.format as ExportFormat | undefined) ?? exportFormatOf(value);
        let bytes: Uint8Array;
        try {
          bytes = exportArtifact(value, format, `Tracewright run ${id} step ${opts.step} (${slot})`);
        } catch (err) {
          throw new AppError("bad-input", `--format ${format}: ${(err as Error).message}`, { field: "--format" });
        }
        const out = path.resolve(opts.out);
        const dir = path.dirname(out);
        if (!fs.existsSync(dir) || !fs.statSync(dir).isDirectory()) {
          throw new AppError("bad-input", `--out ${opts.out}: the folder ${dir} does not exist`, { field: "--out" });
        }
        if (fs.existsSync(out) && fs.statSync(out).isDirectory()) {
          throw new AppError("bad-input", `--out ${opts.out}: is a folder; give a file name`, { field: "--out" });
        }
        if (fs.existsSync(out) && !opts.force) throw new AppError("conflict", `${out} exists; pass --force to replace it`);
        // Write beside the target and rename: never a half-written file under the target's name.
        const tmp = `${out}.${process.pid}.tmp`;
        try {
          fs.writeFileSync(tmp, bytes);
          fs.renameSync(tmp, out);
        } catch (err) {
          throw new AppError("bad-input", `--out ${opts.out}: cannot be written (${(err as NodeJS.ErrnoException).code ?? "error"})`, {
            field: "--out",
          });
        } finally {
          fs.rmSync(tmp, { force: true });
        }
        process.stdout.write(`wrote ${slot} of run ${id} step ${opts.step} to ${out} (${format}, ${bytes.length} bytes)\n`);
      }),
    );
}
