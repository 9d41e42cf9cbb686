/**
 * Reader of the geometry table: the CSV the field crew writes, giving every field file its
 * source point, blow, source position and the position of each channel.
 *
 * Two forms, told apart by the header row (see notes on the pipeline file contract):
 *
 * - spread form, one row per field file:
 *   `file,source_point,blow,source_x_m,first_channel_x_m,channel_spacing_m,channel_count`
 *   (optional `source_z_m`, `receiver_z_m`, default 0); channel c (1-based) sits at
 *   `first_channel_x_m + (c - 1) * channel_spacing_m`.
 * - channel form, one row per trace:
 *   `file,channel,source_point,blow,source_x_m,receiver_x_m` (optional `source_z_m`,
 *   `receiver_z_m`, default 0).
 *
 * Lines starting with `#` are comments, blank lines are ignored. Every error is an AppError
 * ("bad-input") naming the table, the 1-based line, the column and what was expected.
 * Positions are in metres; z is depth, positive down, 0 at the surface.
 */
import { parse } from "csv-parse/sync";
import { AppError } from "../errors";

/** Which of the two accepted table layouts a table uses. */
export type GeometryTableForm = "spread" | "channel";

/** Position of one channel of a field file. */
export interface GeometryChannel {
  /** Channel number, 1-based. */
  channel: number;
  /** Receiver position along the profile, m. */
  receiverX: number;
  /** Receiver depth, m (positive down). */
  receiverZ: number;
  /** 1-based line of the table the position comes from. */
  line: number;
}

/** Everything the table says about one field file. */
export interface GeometryFileEntry {
  /** Field file name, as written in the table (no folder). */
  file: string;
  /** Source point number. */
  sourcePoint: number;
  /** Blow number at the source point, 1-based. */
  blow: number;
  /** Source position along the profile, m. */
  sourceX: number;
  /** Source depth, m (positive down). */
  sourceZ: number;
  /** Channels in ascending channel order. */
  channels: GeometryChannel[];
  /** 1-based line of the file's row (spread form) or of its first row (channel form). */
  line: number;
}

/** A parsed geometry table. */
export interface GeometryTable {
  /** Table file name as given (used in messages). */
  name: string;
  form: GeometryTableForm;
  /** One entry per field file, in table order. */
  files: GeometryFileEntry[];
}

const SPREAD_REQUIRED = [
  "file",
  "source_point",
  "blow",
  "source_x_m",
  "first_channel_x_m",
  "channel_spacing_m",
  "channel_count",
] as const;
const CHANNEL_REQUIRED = ["file", "channel", "source_point", "blow", "source_x_m", "receiver_x_m"] as const;
const OPTIONAL = ["source_z_m", "receiver_z_m"] as const;
/** Columns only the spread form has, and only the channel form has: they tell the form. */
/** Most channels one record can hold (SEG-2 stores the trace count in 16 bits). */
export const MAX_CHANNELS = 65535;

const SPREAD_ONLY = ["first_channel_x_m", "channel_spacing_m", "channel_count"];
const CHANNEL_ONLY = ["channel", "receiver_x_m"];

// A plain decimal number, optionally with an exponent. Rejects "1,5", "0x10", "", "1.2.3", "Infinity".
const NUMBER_RE = /^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$/;

/** Column accessor bound to one row, producing located errors. */
class RowReader {
  constructor(
    private readonly tableName: string,
    private readonly columns: Map<string, number>,
    private readonly record: string[],
    readonly line: number,
  ) {}

  fail(column: string, expected: string, got: string | undefined): never {
    const shown = got === undefined || got === "" ? "an empty cell" : JSON.stringify(got);
    throw new AppError("bad-input", `${this.tableName} line ${this.line}, column ${column}: expected ${expected}, got ${shown}`, {
      file: this.tableName,
      line: this.line,
      field: column,
      expected,
    });
  }

  raw(column: string): string | undefined {
    const i = this.columns.get(column);
    return i === undefined ? undefined : this.record[i];
  }

  text(column: string): string {
    const v = this.raw(column) ?? "";
    if (v === "") this.fail(column, "a file name", v);
    if (v.includes("/") || v.includes("\\")) this.fail(column, "a file name without a folder", v);
    return v;
  }

  number(column: string): number {
    const v = this.raw(column);
    if (v === undefined || !NUMBER_RE.test(v)) this.fail(column, "a number", v);
    return Number(v);
  }

  /** Optional column: absent or empty cell gives `fallback`. */
  optionalNumber(column: string, fallback: number): number {
    const v = this.raw(column);
    if (v === undefined || v === "") return fallback;
    return this.number(column);
  }

  integer(column: string, min: number, max = Number.MAX_SAFE_INTEGER): number {
    const v = this.raw(column);
    const expected =
      max < Number.MAX_SAFE_INTEGER ? `a whole number from ${min} to ${max}` : min === 0 ? "a whole number >= 0" : `a whole number >= ${min}`;
    if (v === undefined || !/^[+-]?\d+$/.test(v)) this.fail(column, expected, v);
    const n = Number(v);
    if (!Number.isSafeInteger(n) || n < min || n > max) this.fail(column, expected, v);
    return n;
  }

  positive(column: string): number {
    const n = this.number(column);
    if (!(n > 0)) this.fail(column, "a number > 0", this.raw(column));
    return n;
  }
}

function tableError(tableName: string, line: number | undefined, message: string, details: { field?: string; expected?: string; choices?: string[] } = {}): AppError {
  const where = line === undefined ? tableName : `${tableName} line ${line}`;
  return new AppError("bad-input", `${where}: ${message}`, { file: tableName, line, ...details });
}

/**
 * Parses a geometry table in either form.
 *
 * @param text CSV text of the table.
 * @param tableName Name of the table file as the user knows it; every message starts with it.
 * @returns The table with one entry per field file (channel lists sorted by channel).
 * @throws AppError "bad-input" naming the line and column: unreadable CSV, missing or unknown
 *   or repeated columns, a header that fits neither form, bad numbers, non-positive spacing,
 *   channel_count < 1, a file listed twice (spread form) or a channel listed twice (channel
 *   form), rows of one file that disagree on source point, blow or source position, or a
 *   table without data rows.
 */
export function parseGeometryTable(text: string, tableName: string): GeometryTable {
  let rows: Array<{ record: string[]; info: { lines: number } }>;
  try {
    rows = parse(text, {
      info: true,
      comment: "#",
      comment_no_infix: true,
      skip_empty_lines: true,
      relax_column_count: true,
      trim: true,
      bom: true,
    }) as unknown as Array<{ record: string[]; info: { lines: number } }>;
  } catch (err) {
    const line = typeof (err as { lines?: unknown }).lines === "number" ? (err as { lines: number }).lines : undefined;
    const reason = err instanceof Error ? err.message : String(err);
    throw new AppError(
      "bad-input",
      `${tableName}${line !== undefined ? ` line ${line}` : ""}: not readable as CSV (${reason})`,
      { file: tableName, line, expected: "comma-separated values with a header row" },
      { cause: err },
    );
  }
  if (rows.length === 0) {
    throw tableError(tableName, undefined, "no header row", { expected: `a header row such as ${SPREAD_REQUIRED.join(",")}` });
  }

  const header = rows[0];
  const headerLine = header.info.lines;
  const names = header.record.map((h) => h.toLowerCase());
  const columns = new Map<string, number>();
  names.forEach((name, i) => {
    if (name === "") {
      throw tableError(tableName, headerLine, `column ${i + 1} of the header row has no name`, { expected: "a column name" });
    }
    if (columns.has(name)) {
      throw tableError(tableName, headerLine, `column ${name} appears twice in the header row`, { field: name, expected: "each column once" });
    }
    columns.set(name, i);
  });

  const hasSpread = SPREAD_ONLY.some((c) => columns.has(c));
  const hasChannel = CHANNEL_ONLY.some((c) => columns.has(c));
  if (hasSpread && hasChannel) {
    const mixed = [...SPREAD_ONLY, ...CHANNEL_ONLY].filter((c) => columns.has(c));
    throw tableError(tableName, headerLine, `the header mixes the spread form and the channel form (${mixed.join(", ")})`, {
      expected: `either ${SPREAD_REQUIRED.join(",")} or ${CHANNEL_REQUIRED.join(",")}`,
    });
  }
  if (!hasSpread && !hasChannel) {
    throw tableError(tableName, headerLine, "the header fits neither form of the geometry table", {
      expected: `either ${SPREAD_REQUIRED.join(",")} (one row per file) or ${CHANNEL_REQUIRED.join(",")} (one row per trace)`,
    });
  }
  const form: GeometryTableForm = hasSpread ? "spread" : "channel";
  const required: readonly string[] = form === "spread" ? SPREAD_REQUIRED : CHANNEL_REQUIRED;
  const valid = [...required, ...OPTIONAL];
  for (const name of columns.keys()) {
    if (!valid.includes(name)) {
      throw tableError(tableName, headerLine, `unknown column ${name} in the ${form} form; valid columns: ${valid.join(", ")}`, {
        field: name,
        expected: `one of ${valid.join(", ")}`,
        choices: valid,
      });
    }
  }
  const missing = required.filter((c) => !columns.has(c));
  if (missing.length > 0) {
    throw tableError(tableName, headerLine, `missing column${missing.length > 1 ? "s" : ""} ${missing.join(", ")} for the ${form} form`, {
      field: missing[0],
      expected: `columns ${required.join(",")}`,
    });
  }

  const dataRows = rows.slice(1);
  if (dataRows.length === 0) {
    throw tableError(tableName, headerLine, "the table has a header but no data rows", { expected: "one row per field file or per trace" });
  }

  const entries: GeometryFileEntry[] = [];
  const byFile = new Map<string, GeometryFileEntry>();
  const width = header.record.length;

  for (const { record, info } of dataRows) {
    const line = info.lines;
    if (record.length !== width) {
      throw tableError(tableName, line, `the row has ${record.length} cells but the header has ${width} columns`, {
        expected: `${width} comma-separated cells`,
      });
    }
    const row = new RowReader(tableName, columns, record, line);
    const file = row.text("file");
    const sourcePoint = row.integer("source_point", 0);
    const blow = row.integer("blow", 1);
    const sourceX = row.number("source_x_m");
    const sourceZ = row.optionalNumber("source_z_m", 0);
    const receiverZ = row.optionalNumber("receiver_z_m", 0);

    if (form === "spread") {
      const firstX = row.number("first_channel_x_m");
      const spacing = row.positive("channel_spacing_m");
      // SEG-2 counts traces in 16 bits; a larger count is a typo (and would exhaust memory).
      const count = row.integer("channel_count", 1, MAX_CHANNELS);
      const earlier = byFile.get(file);
      if (earlier) {
        throw tableError(tableName, line, `file ${file} is listed twice (first on line ${earlier.line})`, {
          field: "file",
          expected: "one row per field file in the spread form",
        });
      }
      const channels: GeometryChannel[] = new Array(count);
      for (let c = 0; c < count; c++) {
        channels[c] = { channel: c + 1, receiverX: firstX + c * spacing, receiverZ, line };
      }
      const entry: GeometryFileEntry = { file, sourcePoint, blow, sourceX, sourceZ, channels, line };
      byFile.set(file, entry);
      entries.push(entry);
    } else {
      const channel = row.integer("channel", 1);
      const receiverX = row.number("receiver_x_m");
      let entry = byFile.get(file);
      if (!entry) {
        entry = { file, sourcePoint, blow, sourceX, sourceZ, channels: [], line };
        byFile.set(file, entry);
        entries.push(entry);
      } else {
        // All rows of one file describe one shot: they must agree on it.
        const first = entry.line;
        if (sourcePoint !== entry.sourcePoint) row.fail("source_point", `${entry.sourcePoint} as on line ${first} for file ${file}`, row.raw("source_point"));
        if (blow !== entry.blow) row.fail("blow", `${entry.blow} as on line ${first} for file ${file}`, row.raw("blow"));
        if (sourceX !== entry.sourceX) row.fail("source_x_m", `${entry.sourceX} as on line ${first} for file ${file}`, row.raw("source_x_m"));
        if (sourceZ !== entry.sourceZ) row.fail("source_z_m", `${entry.sourceZ} as on line ${first} for file ${file}`, row.raw("source_z_m"));
        const dup = entry.channels.find((c) => c.channel === channel);
        if (dup) {
          throw tableError(tableName, line, `channel ${channel} of file ${file} is listed twice (first on line ${dup.line})`, {
            field: "channel",
            expected: "one row per channel of each file",
          });
        }
      }
      entry.channels.push({ channel, receiverX, receiverZ, line });
    }
  }
  for (const e of entries) e.channels.sort((a, b) => a.channel - b.channel);
  return { name: tableName, form, files: entries };
}
