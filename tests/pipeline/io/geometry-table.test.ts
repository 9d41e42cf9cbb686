/**
 * Geometry table reader. The reference for every check is the geometry-table contract of the
 * pipeline file (two forms, `#` comments, blank lines, defaults) and RFC 4180 for CSV quoting.
 */
import { describe, expect, it } from "vitest";
import { parseGeometryTable } from "../../../pipeline/io/geometry-table";
import { AppError } from "../../../pipeline/errors";

const SPREAD_HEADER = "file,source_point,blow,source_x_m,first_channel_x_m,channel_spacing_m,channel_count";
const CHANNEL_HEADER = "file,channel,source_point,blow,source_x_m,receiver_x_m";

/** Runs the parser and returns the AppError it throws (fails the test if it does not throw one). */
function errorOf(text: string, name = "line-a-geometry.csv"): AppError {
  try {
    parseGeometryTable(text, name);
  } catch (err) {
    expect(err).toBeInstanceOf(AppError);
    return err as AppError;
  }
  throw new Error("expected the table to be rejected");
}

describe("parseGeometryTable, spread form", () => {
  it("places channel c at first_channel_x_m + (c - 1) * channel_spacing_m (contract)", () => {
    const text = [
      "# crew log, day 1",
      SPREAD_HEADER,
      "",
      "a-1.sg2,3,1,-2.5,10.0,0.5,6",
      "# second blow",
      "a-2.sg2,3,2,-2.5,10.0,0.5,6",
    ].join("\n");
    const t = parseGeometryTable(text, "g.csv");
    expect(t.form).toBe("spread");
    expect(t.files.map((f) => f.file)).toEqual(["a-1.sg2", "a-2.sg2"]);
    const f = t.files[0];
    expect(f).toMatchObject({ sourcePoint: 3, blow: 1, sourceX: -2.5, sourceZ: 0, line: 4 });
    // Contract: positions first_channel_x_m + (c - 1) * spacing; 10.0 + 5 * 0.5 = 12.5 for channel 6.
    expect(f.channels.map((c) => c.receiverX)).toEqual([10, 10.5, 11, 11.5, 12, 12.5]);
    expect(f.channels.map((c) => c.channel)).toEqual([1, 2, 3, 4, 5, 6]);
    // Contract: receiver_z_m defaults to 0.
    expect(f.channels.every((c) => c.receiverZ === 0)).toBe(true);
    // Line numbers count comment and blank lines (1-based physical lines).
    expect(t.files[1].line).toBe(6);
  });

  it("reads the optional depth columns in any column order", () => {
    const text = "receiver_z_m,channel_count,file,blow,source_point,source_z_m,source_x_m,channel_spacing_m,first_channel_x_m\n0.1,2,b.sg2,1,0,0.3,4,2,0\n";
    const f = parseGeometryTable(text, "g.csv").files[0];
    expect(f).toMatchObject({ sourcePoint: 0, blow: 1, sourceX: 4, sourceZ: 0.3 });
    expect(f.channels).toEqual([
      { channel: 1, receiverX: 0, receiverZ: 0.1, line: 2 },
      { channel: 2, receiverX: 2, receiverZ: 0.1, line: 2 },
    ]);
  });

  it("names table, line, column and the expectation for a decimal comma (RFC 4180 quoted cell)", () => {
    const text = [SPREAD_HEADER, "a.sg2,1,1,0,0,1,4", 'b.sg2,1,2,"1,5",0,1,4'].join("\n");
    const e = errorOf(text, "qm-geometry.csv");
    expect(e.code).toBe("bad-input");
    expect(e.message).toBe('qm-geometry.csv line 3, column source_x_m: expected a number, got "1,5"');
    expect(e.details).toMatchObject({ file: "qm-geometry.csv", line: 3, field: "source_x_m", expected: "a number" });
  });

  it("rejects an empty required cell", () => {
    const e = errorOf([SPREAD_HEADER, "a.sg2,1,1,,0,1,4"].join("\n"));
    expect(e.message).toBe("line-a-geometry.csv line 2, column source_x_m: expected a number, got an empty cell");
  });

  it("rejects non-positive spacing and channel_count < 1", () => {
    expect(errorOf([SPREAD_HEADER, "a.sg2,1,1,0,0,0,4"].join("\n")).details).toMatchObject({ line: 2, field: "channel_spacing_m", expected: "a number > 0" });
    expect(errorOf([SPREAD_HEADER, "a.sg2,1,1,0,0,-1,4"].join("\n")).details).toMatchObject({ field: "channel_spacing_m" });
    expect(errorOf([SPREAD_HEADER, "a.sg2,1,1,0,0,1,0"].join("\n")).details).toMatchObject({ field: "channel_count", expected: "a whole number from 1 to 65535" });
    // SEG-2 stores the trace count in 16 bits (SEG-2 standard, 1990): more is a typo, refused before any allocation.
    expect(errorOf([SPREAD_HEADER, "a.sg2,1,1,0,0,1,100000000"].join("\n")).details).toMatchObject({ line: 2, field: "channel_count" });
    expect(errorOf([SPREAD_HEADER, "a.sg2,1,1,0,0,1,2.5"].join("\n")).details).toMatchObject({ field: "channel_count" });
    expect(errorOf([SPREAD_HEADER, "a.sg2,1,0,0,0,1,4"].join("\n")).details).toMatchObject({ field: "blow" });
  });

  it("rejects a file listed twice and names both lines", () => {
    const e = errorOf([SPREAD_HEADER, "a.sg2,1,1,0,0,1,4", "# note", "a.sg2,2,1,2,0,1,4"].join("\n"));
    expect(e.message).toContain("line 4");
    expect(e.message).toContain("first on line 2");
    expect(e.details).toMatchObject({ line: 4, field: "file" });
  });

  it("lists the valid columns for an unknown one", () => {
    const e = errorOf(SPREAD_HEADER + ",geophone_type\na.sg2,1,1,0,0,1,4,4.5Hz\n");
    expect(e.details.line).toBe(1);
    expect(e.details.field).toBe("geophone_type");
    expect(e.details.choices).toEqual([
      "file", "source_point", "blow", "source_x_m", "first_channel_x_m", "channel_spacing_m", "channel_count", "source_z_m", "receiver_z_m",
    ]);
    expect(e.message).toContain("valid columns: file, source_point");
  });

  it("names missing required columns", () => {
    const e = errorOf("file,source_point,blow,first_channel_x_m,channel_spacing_m,channel_count\na.sg2,1,1,0,1,4\n");
    expect(e.message).toContain("missing column source_x_m");
    expect(e.details).toMatchObject({ line: 1, field: "source_x_m" });
  });

  it("rejects a header of neither form, a mixed header, and a row with the wrong cell count", () => {
    expect(errorOf("file,source_point,blow,source_x_m\na.sg2,1,1,0\n").message).toContain("fits neither form");
    expect(errorOf(SPREAD_HEADER + ",receiver_x_m\na.sg2,1,1,0,0,1,4,3\n").message).toContain("mixes the spread form and the channel form");
    const e = errorOf([SPREAD_HEADER, "a.sg2,1,1,0,0,1"].join("\n"));
    expect(e.details.line).toBe(2);
    expect(e.message).toContain("6 cells but the header has 7 columns");
  });

  it("rejects a file name with a folder, an empty table and unreadable CSV with its line", () => {
    expect(errorOf([SPREAD_HEADER, "field/a.sg2,1,1,0,0,1,4"].join("\n")).details).toMatchObject({ field: "file", expected: "a file name without a folder" });
    expect(errorOf("# only a comment\n\n").message).toContain("no header row");
    expect(errorOf(SPREAD_HEADER + "\n").message).toContain("no data rows");
    // RFC 4180: a quoted cell must be closed.
    const e = errorOf([SPREAD_HEADER, 'a.sg2,1,1,"0,0,1,4'].join("\n"));
    expect(e.message).toContain("not readable as CSV");
    expect(e.details.line).toBe(2);
  });
});

describe("parseGeometryTable, channel form", () => {
  it("groups rows per file, sorts channels, and keeps each row's line", () => {
    const text = [
      CHANNEL_HEADER + ",receiver_z_m",
      "c.sg2,2,5,1,8.0,3.0,0",
      "c.sg2,1,5,1,8.0,2.0,0.5",
      "d.sg2,1,5,2,8.0,2.0,0",
    ].join("\n");
    const t = parseGeometryTable(text, "g.csv");
    expect(t.form).toBe("channel");
    expect(t.files).toHaveLength(2);
    expect(t.files[0]).toMatchObject({ file: "c.sg2", sourcePoint: 5, blow: 1, sourceX: 8, line: 2 });
    expect(t.files[0].channels).toEqual([
      { channel: 1, receiverX: 2, receiverZ: 0.5, line: 3 },
      { channel: 2, receiverX: 3, receiverZ: 0, line: 2 },
    ]);
    expect(t.files[1].blow).toBe(2);
  });

  it("rejects a repeated channel and rows of one file that disagree on the shot", () => {
    const dup = errorOf([CHANNEL_HEADER, "c.sg2,1,5,1,8,2", "c.sg2,1,5,1,8,3"].join("\n"));
    expect(dup.details).toMatchObject({ line: 3, field: "channel" });
    expect(dup.message).toContain("first on line 2");
    const moved = errorOf([CHANNEL_HEADER, "c.sg2,1,5,1,8,2", "c.sg2,2,5,1,9,3"].join("\n"));
    expect(moved.message).toBe('line-a-geometry.csv line 3, column source_x_m: expected 8 as on line 2 for file c.sg2, got "9"');
    expect(errorOf([CHANNEL_HEADER, "c.sg2,0,5,1,8,2"].join("\n")).details).toMatchObject({ field: "channel", expected: "a whole number >= 1" });
  });

  it("lists the channel form's valid columns for an unknown one", () => {
    const e = errorOf(CHANNEL_HEADER + ",first_break_ms\nc.sg2,1,5,1,8,2,3\n");
    expect(e.details.choices).toEqual(["file", "channel", "source_point", "blow", "source_x_m", "receiver_x_m", "source_z_m", "receiver_z_m"]);
  });
});
