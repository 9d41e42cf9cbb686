/**
 * Traces holding NaN or infinite samples (IEEE 754-2008: float32 and float64 carry them; a float64
 * above the float32 range becomes infinite when narrowed). The readers mark such traces dead,
 * zeroed, with a warning naming file, trace and count, or refuse the file by a setting.
 */
import { describe, expect, it } from "vitest";
import { FileFormatError } from "../../../pipeline/errors";
import { readSeg2, seg2ToGather, writeSeg2 } from "../../../pipeline/io/seg2";
import { readSegy, segyToGathers, writeSegy, type SegyWriteTrace } from "../../../pipeline/io/segy";
import type { NonFiniteTraceWarning } from "../../../pipeline/io/samples";
import { importRecordsParams, importRecordsStep, type ImportReport } from "../../../pipeline/steps/import-records";
import { catchError } from "../../helpers/catch-error";
import { makeStepContext } from "../../helpers/step-context";

const ns = 8;

function seg2With(bad: Record<number, number[]>, formatCode: 4 | 5 = 4): Uint8Array {
  return writeSeg2(
    {
      fileStrings: {},
      traces: Array.from({ length: 4 }, (_, i) => {
        const samples = new Float64Array(ns).fill(i + 1);
        for (const [k, v] of (bad[i] ?? []).entries()) samples[k] = v;
        return { strings: { CHANNEL_NUMBER: String(i + 11), SAMPLE_INTERVAL: "0.00025" }, samples };
      }),
    },
    { formatCode },
  );
}

function segyWith(bad: Record<number, number[]>): Uint8Array {
  const traces: SegyWriteTrace[] = Array.from({ length: 4 }, (_, i) => {
    const samples = new Float32Array(ns).fill(i + 1);
    for (const [k, v] of (bad[i] ?? []).entries()) samples[k] = v;
    return { fieldRecord: 1, channel: i + 21, sourcePointNumber: 1, sourceX: 0, sourceZ: 0, receiverX: i + 1, receiverZ: 0, offset: i + 1, stackCount: 1, dead: false, samples };
  });
  return writeSegy({ sampleIntervalS: 0.00025, sampleCount: ns, startTimeS: 0, traces });
}

describe("SEG-2 traces with NaN or infinite samples", () => {
  it("marks the trace dead and zeroed, warns with file, trace and count, and leaves the others alone", () => {
    const bytes = seg2With({ 2: [NaN, 1, Infinity, -Infinity] });
    const warnings: NonFiniteTraceWarning[] = [];
    const g = seg2ToGather(readSeg2(bytes, "sp05.sg2"), "sp05.sg2", { id: "sp05", sourceFile: "sp05.sg2", warnings });
    expect(g.traces.map((t) => t.dead)).toEqual([false, false, true, false]);
    expect(Array.from(g.data.subarray(2 * ns, 3 * ns))).toEqual(new Array(ns).fill(0));
    expect(Array.from(g.data.subarray(3 * ns, 4 * ns))).toEqual(new Array(ns).fill(4));
    expect(g.data.every(Number.isFinite)).toBe(true);
    expect(warnings).toHaveLength(1);
    expect(warnings[0]).toMatchObject({ file: "sp05.sg2", trace: 3, channel: 13, count: 3 });
    expect(warnings[0].message).toMatch(/sp05\.sg2.*trace 3.*3 NaN or infinite samples/);
  });

  it("turns a float64 (format 5) sample beyond the float32 range into a dead trace", () => {
    // 1e300 is finite in float64 and infinite once narrowed to float32 (IEEE 754 overflow).
    const warnings: NonFiniteTraceWarning[] = [];
    const g = seg2ToGather(readSeg2(seg2With({ 0: [1e300] }, 5), "big.sg2"), "big.sg2", { id: "big", sourceFile: "big.sg2", warnings });
    expect(g.traces[0].dead).toBe(true);
    expect(warnings[0]).toMatchObject({ trace: 1, count: 1 });
  });

  it("refuses the file by setting, at the byte offset of the first bad sample", () => {
    const bytes = seg2With({ 1: [0, 0, NaN] });
    const file = readSeg2(bytes, "sp06.sg2");
    const err = catchError<FileFormatError>(() => seg2ToGather(file, "sp06.sg2", { id: "sp06", sourceFile: "sp06.sg2", nonFiniteSamples: "refuse" }));
    expect(err).toBeInstanceOf(FileFormatError);
    expect(err.details.byteOffset).toBe(file.traces[1].dataOffset + 2 * 4);
    expect(new DataView(bytes.buffer).getFloat32(err.details.byteOffset!, true)).toBeNaN();
    expect(err.message).toContain("trace 2");
  });
});

describe("SEG-Y traces with NaN or infinite samples", () => {
  it("marks the trace dead and zeroed with a warning naming file, trace and count", () => {
    const warnings: NonFiniteTraceWarning[] = [];
    const [g] = segyToGathers(readSegy(segyWith({ 3: [Infinity, NaN] }), "line.sgy"), "line.sgy", { id: "line", warnings });
    expect(g.traces.map((t) => t.dead)).toEqual([false, false, false, true]);
    expect(g.data.every(Number.isFinite)).toBe(true);
    expect(warnings).toEqual([expect.objectContaining({ file: "line.sgy", trace: 4, channel: 24, count: 2, byteOffset: 3600 + 3 * (240 + 4 * ns) })]);
  });

  it("refuses the file by setting, at the byte offset of the first bad sample", () => {
    const bytes = segyWith({ 0: [1, NaN] });
    const err = catchError<FileFormatError>(() => segyToGathers(readSegy(bytes, "x.sgy"), "x.sgy", { id: "x", nonFiniteSamples: "refuse" }));
    expect(err).toBeInstanceOf(FileFormatError);
    expect(err.details.byteOffset).toBe(3600 + 240 + 4);
  });
});

describe("import-records with non-finite samples", () => {
  const fieldFiles = { kind: "field-files" as const, files: [{ name: "sp05.sg2", sha256: "", bytes: seg2With({ 1: [NaN] }) }, { name: "sp06.sg2", sha256: "", bytes: seg2With({}) }] };

  it("reports and logs the dead trace and emits no NaN", async () => {
    const lines: string[] = [];
    const ctx = makeStepContext({ level: "warn" });
    ctx.log = (await import("pino")).pino({ level: "warn" }, { write: (s: string) => void lines.push(s) });
    const out = await importRecordsStep.run({ fieldFiles }, importRecordsParams.parse({}), ctx);
    const report = (out.outputs.report as { data: ImportReport }).data;
    expect(report.nonFiniteTraces).toEqual([{ file: "sp05.sg2", trace: 2, channel: 12, count: 1 }]);
    expect(out.summary).toMatchObject({ tracesWithNonFiniteSamples: 1 });
    const gathers = (out.outputs.gathers as { gathers: Array<{ data: Float32Array }> }).gathers;
    expect(gathers.every((g) => g.data.every(Number.isFinite))).toBe(true);
    expect(lines.join("")).toMatch(/sp05\.sg2: trace 2 \(channel 12\) holds 1 NaN or infinite sample;/);
  });

  it("refuses the file when told to, and then onBadFile decides", async () => {
    const params = importRecordsParams.parse({ onNonFiniteSamples: "refuse", onBadFile: "skip" });
    const out = await importRecordsStep.run({ fieldFiles }, params, makeStepContext());
    const report = (out.outputs.report as { data: ImportReport }).data;
    expect(report.read.map((r) => r.file)).toEqual(["sp06.sg2"]);
    expect(report.rejected[0]).toMatchObject({ file: "sp05.sg2" });
    await expect(importRecordsStep.run({ fieldFiles }, importRecordsParams.parse({ onNonFiniteSamples: "refuse" }), makeStepContext())).rejects.toBeInstanceOf(FileFormatError);
  });
});
