/**
 * Step "import-records": reads the dataset's field files (SEG-2 or SEG-Y rev 2.0, told by content
 * with the extension as a hint) into gathers, one per field record, and reports what it read,
 * rejected and ignored.
 */
import { z } from "zod";
import { AppError, FileFormatError } from "../errors";
import { defineStep, StepInputError, throwIfAborted } from "../step";
import type { Gather } from "../types";
import { detectFieldFileFormat, fileExtension, fileStem, type FieldFileFormat } from "../io/detect-format";
import { readSeg2, seg2ToGather } from "../io/seg2";
import { readSegy, segyToGathers } from "../io/segy";
import type { NonFiniteSamplePolicy, NonFiniteTraceWarning } from "../io/samples";

export const importRecordsParams = z.object({
  /** @default "stop" */
  onBadFile: z
    .enum(["stop", "skip"])
    .default("stop")
    .describe('What to do with a malformed or truncated field file: "stop" the run naming the file and byte offset, or "skip" it (recorded in the report and logged as a warning)'),
  /** @default [".sg2", ".seg2", ".dat", ".sgy", ".segy"] */
  extensions: z
    .array(z.string().regex(/^\.[A-Za-z0-9_-]+$/, 'an extension with its dot, e.g. ".sg2"'))
    .min(1)
    .default([".sg2", ".seg2", ".dat", ".sgy", ".segy"])
    .describe("File extensions (with the dot, any case) that count as field files; other files of the folder are ignored and listed in the report"),
  /** @default "z" */
  component: z.enum(["z", "x", "y"]).default("z").describe('Recorded component of every trace: "z" vertical, "x" inline horizontal, "y" crossline horizontal'),
  /** @default "mark-dead" */
  onNonFiniteSamples: z
    .enum(["mark-dead", "refuse"])
    .default("mark-dead")
    .describe('What to do with a trace holding NaN or infinite samples: "mark-dead" zeroes it, marks it dead and logs a warning naming file, trace and count; "refuse" treats the file as bad (then onBadFile decides)'),
});

export type ImportRecordsParams = z.output<typeof importRecordsParams>;

/** What the import report holds (slot `report`, role "import"). */
export interface ImportReport {
  read: Array<{ file: string; format: FieldFileFormat; traces: number; samples: number; sampleIntervalS: number }>;
  rejected: Array<{ file: string; reason: string; byteOffset?: number }>;
  ignored: string[];
  /** Traces marked dead because they held NaN or infinite samples. */
  nonFiniteTraces?: Array<{ file: string; trace: number; channel: number; count: number }>;
}

/** Reads one field file into its gathers; throws FileFormatError for a bad file. */
export function readFieldFile(
  name: string,
  bytes: Uint8Array,
  component: "z" | "x" | "y",
  nonFiniteSamples: NonFiniteSamplePolicy = "mark-dead",
  warnings: NonFiniteTraceWarning[] = [],
): { format: FieldFileFormat; gathers: Gather[] } {
  const format = detectFieldFileFormat(name, bytes);
  const id = fileStem(name);
  if (format === "seg2") {
    const file = readSeg2(bytes, name);
    return { format, gathers: [seg2ToGather(file, name, { id, sourceFile: name, component, nonFiniteSamples, warnings })] };
  }
  return { format, gathers: segyToGathers(readSegy(bytes, name), name, { id, component, nonFiniteSamples, warnings }) };
}

export const importRecordsStep = defineStep({
  id: "import-records",
  // 2: traces with NaN or infinite samples are zeroed and marked dead (or the file refused).
  version: 2,
  title: "Import field records",
  description:
    "Reads every field file of the dataset into gathers: SEG-2 (SEG 1990; data formats 1-5, either byte order) and SEG-Y revision 2.0 (SEG 2017; IBM or IEEE floats, integers, either byte order), one gather per field record, named by the file name without extension. Start time from the SEG-2 DELAY keyword or the SEG-Y delay recording time; positions from the header keywords when present, else left unknown for the geometry step. Bad files stop the run or are skipped and reported.",
  reads: ["fieldFiles"],
  writes: ["gathers", "report"],
  params: importRecordsParams,
  async run(input, params, ctx) {
    const files = input.fieldFiles?.files;
    if (!files) throw new StepInputError("import-records needs the dataset's field files (slot fieldFiles)", "fieldFiles");
    const wanted = new Set(params.extensions.map((e) => e.toLowerCase()));
    const report: ImportReport = { read: [], rejected: [], ignored: [] };
    const gathers: Gather[] = [];
    const ids = new Set<string>();
    const candidates = files.filter((f) => {
      if (wanted.has(fileExtension(f.name))) return true;
      report.ignored.push(f.name);
      return false;
    });
    for (let i = 0; i < candidates.length; i++) {
      throwIfAborted(ctx.signal);
      const f = candidates[i];
      ctx.progress(i / candidates.length, f.name);
      try {
        const warnings: NonFiniteTraceWarning[] = [];
        const { format, gathers: got } = readFieldFile(f.name, f.bytes, params.component, params.onNonFiniteSamples, warnings);
        for (const g of got) {
          if (ids.has(g.id)) {
            throw new AppError("bad-file", `${f.name}: gather id "${g.id}" is already used by another field file`, {
              file: f.name,
              expected: "field file names that differ without their extension",
            });
          }
        }
        for (const g of got) {
          ids.add(g.id);
          gathers.push(g);
        }
        for (const w of warnings) {
          (report.nonFiniteTraces ??= []).push({ file: w.file, trace: w.trace, channel: w.channel, count: w.count });
          ctx.log.warn({ file: w.file, trace: w.trace, channel: w.channel, nonFiniteSamples: w.count, byteOffset: w.byteOffset }, w.message);
        }
        report.read.push({
          file: f.name,
          format,
          traces: got.reduce((s, g) => s + g.traces.length, 0),
          samples: got[0].sampleCount,
          sampleIntervalS: got[0].sampleIntervalS,
        });
      } catch (err) {
        const bad =
          err instanceof AppError
            ? err
            : new AppError("bad-file", `${f.name}: could not be read: ${err instanceof Error ? err.message : String(err)}`, { file: f.name }, { cause: err });
        if (params.onBadFile === "stop") throw bad;
        const byteOffset = bad instanceof FileFormatError ? bad.details.byteOffset : undefined;
        report.rejected.push({ file: f.name, reason: bad.message, ...(byteOffset !== undefined ? { byteOffset } : {}) });
        ctx.log.warn({ file: f.name, byteOffset }, `skipped bad field file: ${bad.message}`);
      }
    }
    ctx.progress(1);
    if (gathers.length === 0) {
      throw new StepInputError(
        `no field file could be read: ${files.length} files, ${report.rejected.length} rejected, ${report.ignored.length} ignored (extensions read: ${params.extensions.join(", ")})`,
        "fieldFiles",
      );
    }
    const traces = gathers.reduce((s, g) => s + g.traces.length, 0);
    return {
      outputs: { gathers: { kind: "gathers", gathers }, report: { kind: "json", role: "import", data: report } },
      summary: {
        filesRead: report.read.length,
        filesRejected: report.rejected.length,
        filesIgnored: report.ignored.length,
        gathers: gathers.length,
        traces,
        tracesWithNonFiniteSamples: report.nonFiniteTraces?.length ?? 0,
      },
      rejectedFiles: report.rejected.map((r) => ({ file: r.file, reason: r.reason })),
    };
  },
});
