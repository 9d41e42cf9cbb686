/**
 * Step "geometry": gives every trace its source point, blow, source and receiver positions and
 * signed offset from the geometry table, and checks the table against the positions the field
 * files carry in their headers (SEG-2 SOURCE_LOCATION / RECEIVER_LOCATION keywords, SEG-Y source
 * and group coordinates; NaN when a file has none).
 *
 * Geometry mistakes silently spoil everything after them (common practice), so every
 * disagreement beyond the tolerance is listed per file in the report (role "geometry-check"),
 * together with the spread layout: receiver range, source positions, channels per record.
 * Only x positions are compared: depths in headers follow recorder conventions (elevation or
 * depth) too loosely for a check.
 */
import path from "node:path";
import { z } from "zod";
import { AppError } from "../errors";
import { parseGeometryTable, type GeometryFileEntry, type GeometryTable } from "../io/geometry-table";
import { defineStep, StepInputError, throwIfAborted, type StepSeries } from "../step";
import type { Gather, GatherSet, JsonDocument, TraceHeader } from "../types";

export const geometryParams = z.object({
  /** @default 0.25 */
  positionToleranceM: z
    .number()
    .min(0)
    .default(0.25)
    .describe("Largest difference between a table position and a file-header position that is not reported, m"),
  /** @default "table" */
  positionsFrom: z
    .enum(["table", "file-headers"])
    .default("table")
    .describe(
      'Which positions the traces get when both exist: "table" (the geometry table) or "file-headers" (positions in the field files; the table fills those a file lacks). Source point and blow always come from the table',
    ),
  /** @default "stop" */
  onMissingRow: z
    .enum(["stop", "drop"])
    .default("stop")
    .describe('A field file without a table row: "stop" the run with an error naming the file, or "drop" its gather and list it in the report'),
});

export type GeometryParams = z.output<typeof geometryParams>;

/** A file-header position that disagrees with the table. */
export interface PositionDisagreement {
  /** Channel number (1-based), or undefined for the source. */
  channel?: number;
  /** Position from the table, m. */
  tableXM: number;
  /** Position from the field file's header, m. */
  headerXM: number;
  /** headerXM - tableXM, m. */
  differenceM: number;
}

/** Per-file line of the geometry-check report. */
export interface GeometryFileReport {
  file: string;
  gatherId: string;
  /** Line of the table row (first row in the channel form). */
  tableLine: number;
  sourcePoint: number;
  blow: number;
  /** Source position the traces got, m. */
  sourceXM: number;
  channelCount: number;
  /** Whether the file's headers carry positions: all traces, some, or none. */
  headerPositions: "complete" | "partial" | "absent";
  /** Where the assigned positions came from: the table, the headers, or both (headers with table fill-ins). */
  positionsUsed: "table" | "file-headers" | "mixed";
  /** Source disagreement beyond the tolerance (largest over the traces), or null. */
  sourceDisagreement: PositionDisagreement | null;
  /** Receiver disagreements beyond the tolerance, one per channel. */
  receiverDisagreements: PositionDisagreement[];
}

/** Data of the "geometry-check" report. */
export interface GeometryCheckReport {
  table: string;
  form: GeometryTable["form"];
  positionsFrom: GeometryParams["positionsFrom"];
  positionToleranceM: number;
  files: GeometryFileReport[];
  /** Files with at least one disagreement beyond the tolerance. */
  filesWithDisagreement: string[];
  /** Gathers without a table row, dropped (onMissingRow "drop"). */
  dropped: Array<{ gatherId: string; file: string; reason: string }>;
  /** Table rows for which no field file was imported. */
  unusedRows: Array<{ file: string; line: number }>;
  layout: {
    /** Smallest and largest receiver position, m. */
    receiverXRangeM: [number, number] | null;
    /** Distinct source positions, m, ascending. */
    sourceXM: number[];
    /** Distinct channel counts per record. */
    channelsPerRecord: number[];
    sourcePoints: Array<{
      sourcePoint: number;
      blows: number;
      /** Distinct source positions the blows of this source point got, m. */
      sourceXM: number[];
      files: string[];
    }>;
    /** Source points whose blows lie further apart than the tolerance. */
    sourcePointsWithSpread: number[];
    /** Source point and blow numbers given to more than one file (a slip in the field log). */
    repeatedBlows: Array<{ sourcePoint: number; blow: number; files: string[] }>;
  };
}

/** Finds the table entry of a field file: exact name, then the name without its folder. */
function findEntry(byFile: Map<string, GeometryFileEntry>, file: string): GeometryFileEntry | undefined {
  return byFile.get(file) ?? byFile.get(path.posix.basename(file.replaceAll("\\", "/")));
}

/** Unique values, ascending. */
function distinctSorted(values: Iterable<number>): number[] {
  return [...new Set(values)].sort((a, b) => a - b);
}

export const geometryStep = defineStep({
  id: "geometry",
  version: 1,
  title: "Geometry from the field table",
  description:
    "Gives every trace its source point, blow, source and receiver positions and signed offset (receiver x minus source x) from the geometry table (spread form: one row per file; channel form: one row per trace), cross-checks the positions found in the field-file headers and reports every disagreement beyond the tolerance per file, with the spread layout.",
  reads: ["gathers", "geometryTable"],
  writes: ["gathers", "report"],
  params: geometryParams,
  async run(input, params, ctx) {
    const gathers = (input.gathers as GatherSet).gathers;
    const tableInput = input.geometryTable!;
    const table = parseGeometryTable(tableInput.text, tableInput.name);
    const tableName = table.name;
    const byFile = new Map(table.files.map((e) => [e.file, e]));
    const tol = params.positionToleranceM;

    const out: Gather[] = [];
    const files: GeometryFileReport[] = [];
    const dropped: GeometryCheckReport["dropped"] = [];
    const usedRows = new Set<GeometryFileEntry>();
    const series: StepSeries = { name: "source-position", xLabel: "source point", yLabel: "source x (m)", points: [] };

    for (let g = 0; g < gathers.length; g++) {
      throwIfAborted(ctx.signal);
      const gather = gathers[g];
      if (gather.traces.length === 0) throw new StepInputError(`gather "${gather.id}" has no traces`, "gathers");
      const file = gather.traces[0].sourceFile;
      const other = gather.traces.find((t) => t.sourceFile !== file);
      if (other) {
        throw new StepInputError(
          `gather "${gather.id}" mixes traces of ${file} and ${other.sourceFile}; the geometry step expects one field file per gather`,
          "gathers",
        );
      }
      const entry = findEntry(byFile, file);
      if (!entry) {
        if (params.onMissingRow === "stop") {
          throw new AppError(
            "bad-input",
            `${tableName}: no row for field file ${file} (gather "${gather.id}"); add its row, or set onMissingRow: drop to leave it out`,
            { file: tableName, field: "file", expected: `a row for ${file}` },
          );
        }
        dropped.push({ gatherId: gather.id, file, reason: `no row in ${tableName}` });
        ctx.log.warn({ file, gatherId: gather.id }, "field file has no geometry row: gather dropped");
        continue;
      }
      if (usedRows.has(entry)) {
        throw new StepInputError(
          `${tableName} line ${entry.line}: the row for ${entry.file} matches more than one gather (the second is "${gather.id}"); the table describes one shot per field file, so a file holding several records needs splitting into one file per record`,
          "gathers",
        );
      }
      usedRows.add(entry);
      if (entry.channels.length !== gather.traces.length) {
        const field = table.form === "spread" ? "channel_count" : "channel";
        throw new AppError(
          "bad-input",
          `${tableName} line ${entry.line}: file ${file} has ${gather.traces.length} traces but the table gives ${entry.channels.length} channels`,
          { file: tableName, line: entry.line, field, expected: `${gather.traces.length} channels for ${file}` },
        );
      }
      const byChannel = new Map(entry.channels.map((c) => [c.channel, c]));

      let headerCount = 0;
      let fromHeaders = 0;
      let fromTable = 0;
      let sourceDisagreement: PositionDisagreement | null = null;
      const receiverDisagreements: PositionDisagreement[] = [];
      const traces: TraceHeader[] = gather.traces.map((trace) => {
        const ch = byChannel.get(trace.channel);
        if (!ch) {
          throw new AppError(
            "bad-input",
            `${tableName} line ${entry.line}: file ${file} has channel ${trace.channel}, which the table does not list (it lists ${entry.channels[0].channel} to ${entry.channels[entry.channels.length - 1].channel})`,
            { file: tableName, line: entry.line, field: "channel", expected: `a position for channel ${trace.channel} of ${file}` },
          );
        }
        const hasSource = Number.isFinite(trace.sourceX);
        const hasReceiver = Number.isFinite(trace.receiverX);
        if (hasSource && hasReceiver) headerCount++;
        if (hasSource) {
          const d = trace.sourceX - entry.sourceX;
          if (Math.abs(d) > tol && (!sourceDisagreement || Math.abs(d) > Math.abs(sourceDisagreement.differenceM))) {
            sourceDisagreement = { tableXM: entry.sourceX, headerXM: trace.sourceX, differenceM: d };
          }
        }
        if (hasReceiver) {
          const d = trace.receiverX - ch.receiverX;
          if (Math.abs(d) > tol) receiverDisagreements.push({ channel: trace.channel, tableXM: ch.receiverX, headerXM: trace.receiverX, differenceM: d });
        }
        const useHeaders = params.positionsFrom === "file-headers";
        const sourceX = useHeaders && hasSource ? trace.sourceX : entry.sourceX;
        const receiverX = useHeaders && hasReceiver ? trace.receiverX : ch.receiverX;
        const sourceZ = useHeaders && hasSource && Number.isFinite(trace.sourceZ) ? trace.sourceZ : entry.sourceZ;
        const receiverZ = useHeaders && hasReceiver && Number.isFinite(trace.receiverZ) ? trace.receiverZ : ch.receiverZ;
        if (useHeaders && hasSource && hasReceiver) fromHeaders++;
        else fromTable++;
        return {
          ...trace,
          sourcePoint: entry.sourcePoint,
          blow: entry.blow,
          sourceX,
          sourceZ,
          receiverX,
          receiverZ,
          offset: receiverX - sourceX,
        };
      });

      out.push({ ...gather, traces });
      const disagreement = sourceDisagreement as PositionDisagreement | null;
      const report: GeometryFileReport = {
        file,
        gatherId: gather.id,
        tableLine: entry.line,
        sourcePoint: entry.sourcePoint,
        blow: entry.blow,
        sourceXM: traces[0].sourceX,
        channelCount: traces.length,
        headerPositions: headerCount === traces.length ? "complete" : headerCount === 0 ? "absent" : "partial",
        positionsUsed: fromHeaders === 0 ? "table" : fromTable === 0 ? "file-headers" : "mixed",
        sourceDisagreement: disagreement,
        receiverDisagreements,
      };
      files.push(report);
      series.points.push({ x: entry.sourcePoint, y: entry.sourceX, group: "table" });
      if (Number.isFinite(gather.traces[0].sourceX)) series.points.push({ x: entry.sourcePoint, y: gather.traces[0].sourceX, group: "file headers" });
      if (disagreement || receiverDisagreements.length > 0) {
        ctx.log.warn(
          {
            file,
            tableLine: entry.line,
            sourceDifferenceM: disagreement?.differenceM,
            receiverDisagreements: receiverDisagreements.length,
          },
          `geometry table and file headers disagree beyond ${tol} m`,
        );
      }
      ctx.progress((g + 1) / gathers.length);
    }

    const unusedRows = table.files.filter((e) => !usedRows.has(e)).map((e) => ({ file: e.file, line: e.line }));
    if (unusedRows.length > 0) ctx.log.warn({ count: unusedRows.length, files: unusedRows.map((r) => r.file) }, "geometry rows without a field file");

    // Spread layout.
    let rMin = Infinity;
    let rMax = -Infinity;
    for (const g of out) {
      for (const t of g.traces) {
        if (t.receiverX < rMin) rMin = t.receiverX;
        if (t.receiverX > rMax) rMax = t.receiverX;
      }
    }
    const bySourcePoint = new Map<number, GeometryFileReport[]>();
    for (const f of files) {
      const list = bySourcePoint.get(f.sourcePoint) ?? [];
      list.push(f);
      bySourcePoint.set(f.sourcePoint, list);
    }
    const sourcePoints = [...bySourcePoint.entries()]
      .sort((a, b) => a[0] - b[0])
      .map(([sourcePoint, list]) => ({
        sourcePoint,
        blows: list.length,
        sourceXM: distinctSorted(list.map((f) => f.sourceXM)),
        files: list.map((f) => f.file),
      }));
    const sourcePointsWithSpread = sourcePoints
      .filter((sp) => sp.sourceXM.length > 1 && sp.sourceXM[sp.sourceXM.length - 1] - sp.sourceXM[0] > tol)
      .map((sp) => sp.sourcePoint);
    for (const sp of sourcePointsWithSpread) {
      ctx.log.warn({ sourcePoint: sp }, `blows of source point ${sp} lie more than ${tol} m apart`);
    }
    const blowFiles = new Map<string, { sourcePoint: number; blow: number; files: string[] }>();
    for (const f of files) {
      const key = `${f.sourcePoint}/${f.blow}`;
      const e = blowFiles.get(key) ?? { sourcePoint: f.sourcePoint, blow: f.blow, files: [] };
      e.files.push(f.file);
      blowFiles.set(key, e);
    }
    const repeatedBlows = [...blowFiles.values()].filter((e) => e.files.length > 1);
    for (const r of repeatedBlows) {
      ctx.log.warn(r, `source point ${r.sourcePoint}, blow ${r.blow} is given to ${r.files.length} files`);
    }
    const filesWithDisagreement = files.filter((f) => f.sourceDisagreement || f.receiverDisagreements.length > 0).map((f) => f.file);

    const data: GeometryCheckReport = {
      table: tableName,
      form: table.form,
      positionsFrom: params.positionsFrom,
      positionToleranceM: tol,
      files,
      filesWithDisagreement,
      dropped,
      unusedRows,
      layout: {
        receiverXRangeM: out.length > 0 ? [rMin, rMax] : null,
        sourceXM: distinctSorted(files.map((f) => f.sourceXM)),
        channelsPerRecord: distinctSorted(files.map((f) => f.channelCount)),
        sourcePoints,
        sourcePointsWithSpread,
        repeatedBlows,
      },
    };
    const traceCount = out.reduce((n, g) => n + g.traces.length, 0);
    ctx.log.info(
      {
        files: out.length,
        traces: traceCount,
        dropped: dropped.length,
        filesWithDisagreement: filesWithDisagreement.length,
        positionsFrom: params.positionsFrom,
      },
      `geometry assigned from ${tableName} (${table.form} form)`,
    );
    const report: JsonDocument = { kind: "json", role: "geometry-check", data };
    return {
      outputs: { gathers: { kind: "gathers", gathers: out }, report },
      summary: {
        files: out.length,
        traces: traceCount,
        dropped: dropped.length,
        unusedRows: unusedRows.length,
        filesWithDisagreement: filesWithDisagreement.length,
        sourcePointsWithSpread: sourcePointsWithSpread.length,
        repeatedBlows: repeatedBlows.length,
        positionsFrom: params.positionsFrom,
      },
      series: [series],
    };
  },
});

export default geometryStep;
