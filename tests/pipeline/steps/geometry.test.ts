/**
 * Step "geometry". References: the geometry-table contract of the pipeline file (forms,
 * positions first_channel_x_m + (c - 1) * spacing), the trace header contract (signed offset =
 * receiverX - sourceX, pipeline/types.ts; common practice), and the step's documented
 * parameters (tolerance, which positions win, missing rows).
 */
import { describe, expect, it } from "vitest";
import { geometryStep, geometryParams, type GeometryCheckReport } from "../../../pipeline/steps/geometry";
import { AppError } from "../../../pipeline/errors";
import type { Gather, TextInput, TraceHeader } from "../../../pipeline/types";
import { makeStepContext } from "../../helpers/step-context";

const SPREAD_HEADER = "file,source_point,blow,source_x_m,first_channel_x_m,channel_spacing_m,channel_count";

/** A hand-made field record: `channels` traces of 4 samples, header positions as the import step leaves them. */
function record(file: string, channels: number, header: { sourceX?: number; receiverX?: (c: number) => number } = {}): Gather {
  const traces: TraceHeader[] = [];
  for (let c = 1; c <= channels; c++) {
    const sourceX = header.sourceX ?? NaN;
    const receiverX = header.receiverX ? header.receiverX(c) : NaN;
    traces.push({
      sourceFile: file,
      channel: c,
      sourcePoint: 0,
      blow: 1,
      sourceX,
      sourceZ: NaN,
      receiverX,
      receiverZ: NaN,
      offset: receiverX - sourceX,
      stackCount: 1,
      component: "z",
      dead: false,
    });
  }
  const data = new Float32Array(channels * 4);
  for (let i = 0; i < data.length; i++) data[i] = i;
  return { id: file.replace(/\.[^.]+$/, ""), sampleIntervalS: 0.001, sampleCount: 4, startTimeS: -0.002, traces, data };
}

function table(lines: string[], name = "line-a-geometry.csv"): TextInput {
  return { kind: "text", name, text: lines.join("\n") };
}

async function run(gathers: Gather[], geometryTable: TextInput, settings: Record<string, unknown> = {}) {
  const params = geometryParams.parse(settings);
  const result = await geometryStep.run({ gathers: { kind: "gathers", gathers }, geometryTable }, params, makeStepContext());
  const report = result.outputs.report!;
  expect(report.role).toBe("geometry-check");
  return { gathers: result.outputs.gathers!.gathers, report: report.data as GeometryCheckReport, result };
}

async function errorOf(promise: Promise<unknown>): Promise<AppError> {
  try {
    await promise;
  } catch (err) {
    expect(err).toBeInstanceOf(AppError);
    return err as AppError;
  }
  throw new Error("expected an error");
}

describe("geometry step", () => {
  it("has documented defaults: 0.25 m tolerance, table positions, stop on a missing row", () => {
    expect(geometryParams.parse({})).toEqual({ positionToleranceM: 0.25, positionsFrom: "table", onMissingRow: "stop" });
  });

  it("assigns source point, blow, positions and signed offsets from a spread-form table", async () => {
    const gathers = [record("s3-1.sg2", 4), record("s3-2.sg2", 4), record("s4-1.sg2", 4)];
    const { gathers: out, report } = await run(
      gathers,
      table([SPREAD_HEADER + ",receiver_z_m", "s3-1.sg2,3,1,-1.5,0,2,4,0.1", "s3-2.sg2,3,2,-1.5,0,2,4,0.1", "s4-1.sg2,4,1,7,0,2,4,0.1"]),
    );
    expect(out).toHaveLength(3);
    const t = out[0].traces;
    expect(t.map((h) => [h.sourcePoint, h.blow])).toEqual([[3, 1], [3, 1], [3, 1], [3, 1]]);
    // Contract: receiver at first_channel_x_m + (c - 1) * channel_spacing_m.
    expect(t.map((h) => h.receiverX)).toEqual([0, 2, 4, 6]);
    // Signed offset receiverX - sourceX (types.ts contract): 0 - (-1.5) = 1.5, ..., 6 + 1.5 = 7.5.
    expect(t.map((h) => h.offset)).toEqual([1.5, 3.5, 5.5, 7.5]);
    // Source to the right of the spread: negative offsets.
    expect(out[2].traces.map((h) => h.offset)).toEqual([-7, -5, -3, -1]);
    expect(out[1].traces[0].blow).toBe(2);
    expect(t.every((h) => h.receiverZ === 0.1 && h.sourceZ === 0)).toBe(true);
    // Samples and other headers carried over; inputs not mutated.
    expect(out[0].data).toEqual(gathers[0].data);
    expect(out[0].traces[2].channel).toBe(3);
    expect(gathers[0].traces[0].sourcePoint).toBe(0);
    expect(gathers[0].traces[0].sourceX).toBeNaN();

    expect(report.form).toBe("spread");
    expect(report.files.map((f) => f.headerPositions)).toEqual(["absent", "absent", "absent"]);
    expect(report.filesWithDisagreement).toEqual([]);
    expect(report.layout.receiverXRangeM).toEqual([0, 6]);
    expect(report.layout.sourceXM).toEqual([-1.5, 7]);
    expect(report.layout.channelsPerRecord).toEqual([4]);
    expect(report.layout.sourcePoints).toEqual([
      { sourcePoint: 3, blows: 2, sourceXM: [-1.5], files: ["s3-1.sg2", "s3-2.sg2"] },
      { sourcePoint: 4, blows: 1, sourceXM: [7], files: ["s4-1.sg2"] },
    ]);
  });

  it("reports a blow whose table source position is 2 m off its header, and honours the tolerance", async () => {
    const spacing = (c: number) => (c - 1) * 1.0;
    const gathers = () => [
      record("p1-1.sg2", 3, { sourceX: -1.1, receiverX: spacing }), // 0.1 m: inside 0.25 m
      record("p1-2.sg2", 3, { sourceX: 1.0, receiverX: spacing }), // logged at source point 1 but shot 2 m away
      record("p2-1.sg2", 3, { sourceX: 1.0, receiverX: (c) => spacing(c) + (c === 2 ? 0.3 : 0.2) }),
    ];
    const csv = table([SPREAD_HEADER, "p1-1.sg2,1,1,-1,0,1,3", "p1-2.sg2,1,2,-1,0,1,3", "p2-1.sg2,2,1,1,0,1,3"]);
    const { gathers: out, report } = await run(gathers(), csv);
    expect(report.filesWithDisagreement).toEqual(["p1-2.sg2", "p2-1.sg2"]);
    const bad = report.files[1];
    expect(bad.tableLine).toBe(3);
    expect(bad.sourceDisagreement).toEqual({ tableXM: -1, headerXM: 1, differenceM: 2 });
    expect(report.files[0].sourceDisagreement).toBeNull();
    // Receiver off by 0.3 m (> 0.25) is listed, the 0.2 m ones are not.
    expect(report.files[2].receiverDisagreements).toHaveLength(1);
    expect(report.files[2].receiverDisagreements[0].channel).toBe(2);
    expect(report.files[2].receiverDisagreements[0].differenceM).toBeCloseTo(0.3, 12);
    // The table wins by default.
    expect(report.positionsFrom).toBe("table");
    expect(report.files[1].positionsUsed).toBe("table");
    expect(out[1].traces[0].sourceX).toBe(-1);
    // The two blows of source point 1 got the same table position: no spread from the table side.
    expect(report.layout.sourcePointsWithSpread).toEqual([]);

    // At 1.9 m the 2 m mistake is still reported (the 0.3 m receiver no longer); at 2.5 m nothing is.
    expect((await run(gathers(), csv, { positionToleranceM: 1.9 })).report.filesWithDisagreement).toEqual(["p1-2.sg2"]);
    expect((await run(gathers(), csv, { positionToleranceM: 2.5 })).report.filesWithDisagreement).toEqual([]);
  });

  it("takes header positions when asked, filling missing ones from the table, and says so", async () => {
    const gathers = [
      record("h1.sg2", 2, { sourceX: 1.0, receiverX: (c) => 10 + c }),
      record("h2.sg2", 2), // no header positions
    ];
    const csv = table([SPREAD_HEADER, "h1.sg2,1,2,-1,0,1,2", "h2.sg2,1,3,-1,0,1,2"]);
    const { gathers: out, report } = await run(gathers, csv, { positionsFrom: "file-headers" });
    expect(report.positionsFrom).toBe("file-headers");
    expect(out[0].traces.map((t) => [t.sourceX, t.receiverX, t.offset])).toEqual([[1, 11, 10], [1, 12, 11]]);
    expect(report.files[0].positionsUsed).toBe("file-headers");
    expect(report.files[1].positionsUsed).toBe("table");
    expect(out[1].traces.map((t) => t.offset)).toEqual([1, 2]);
    // Blows of source point 1 now 2 m apart: listed as a spread.
    expect(report.layout.sourcePointsWithSpread).toEqual([1]);
    // Source point and blow always come from the table.
    expect(out[0].traces[0].blow).toBe(2);
  });

  it("lists a source point and blow given to two files (a slip in the field log)", async () => {
    const csv = table([SPREAD_HEADER, "k1.sg2,4,1,6,0,1,2", "k2.sg2,4,2,6,0,1,2", "k3.sg2,4,1,6,0,1,2"]);
    const { report, result } = await run([record("k1.sg2", 2), record("k2.sg2", 2), record("k3.sg2", 2)], csv);
    expect(report.layout.repeatedBlows).toEqual([{ sourcePoint: 4, blow: 1, files: ["k1.sg2", "k3.sg2"] }]);
    expect(result.summary).toMatchObject({ repeatedBlows: 1 });
  });

  it("reads the channel form", async () => {
    const csv = table([
      "file,channel,source_point,blow,source_x_m,receiver_x_m",
      "c.sg2,1,9,1,5,0",
      "c.sg2,2,9,1,5,0.5",
      "c.sg2,3,9,1,5,2",
    ]);
    const { gathers: out, report } = await run([record("c.sg2", 3)], csv);
    expect(report.form).toBe("channel");
    expect(out[0].traces.map((t) => t.offset)).toEqual([-5, -4.5, -3]);
  });

  it("stops on a gather without a row, or drops and reports it", async () => {
    const csv = table([SPREAD_HEADER, "a.sg2,1,1,0,0,1,2", "z.sg2,2,1,4,0,1,2"]);
    const e = await errorOf(run([record("a.sg2", 2), record("b.sg2", 2)], csv));
    expect(e.code).toBe("bad-input");
    expect(e.message).toContain("no row for field file b.sg2");
    expect(e.message).toContain("line-a-geometry.csv");
    const { gathers: out, report, result } = await run([record("a.sg2", 2), record("b.sg2", 2)], csv, { onMissingRow: "drop" });
    expect(out.map((g) => g.id)).toEqual(["a"]);
    expect(report.dropped).toEqual([{ gatherId: "b", file: "b.sg2", reason: "no row in line-a-geometry.csv" }]);
    expect(report.unusedRows).toEqual([{ file: "z.sg2", line: 3 }]);
    expect(report.layout.repeatedBlows).toEqual([]);
    expect(result.summary).toMatchObject({ files: 1, dropped: 1, unusedRows: 1 });
  });

  it("rejects a channel-count mismatch naming the file and the table line", async () => {
    const csv = table([SPREAD_HEADER, "# day 2", "a.sg2,1,1,0,0,1,48"]);
    const e = await errorOf(run([record("a.sg2", 24)], csv));
    expect(e.message).toBe("line-a-geometry.csv line 3: file a.sg2 has 24 traces but the table gives 48 channels");
    expect(e.details).toMatchObject({ file: "line-a-geometry.csv", line: 3, field: "channel_count" });
  });

  it("passes the table's located CSV errors through", async () => {
    const e = await errorOf(run([record("a.sg2", 2)], table([SPREAD_HEADER, 'a.sg2,1,1,"1,5",0,1,2'], "qm-geometry.csv")));
    expect(e.message).toBe('qm-geometry.csv line 2, column source_x_m: expected a number, got "1,5"');
  });
});
