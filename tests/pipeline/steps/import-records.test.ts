import { describe, expect, it, vi } from "vitest";
import { AppError } from "../../../pipeline/errors";
import { importRecordsParams, importRecordsStep, type ImportReport } from "../../../pipeline/steps/import-records";
import { writeSeg2 } from "../../../pipeline/io/seg2";
import { writeGatherSetAsSegy } from "../../../pipeline/io/segy";
import type { FieldFile, FieldFileSet } from "../../../pipeline/types";
import { makeStepContext } from "../../helpers/step-context";
import { makeGather } from "./make-gather";

const ns = 16;

function seg2File(name: string, channels: number, delay = "-0.01"): FieldFile {
  const bytes = writeSeg2({
    fileStrings: { COMPANY: "Corvell Ground Imaging" },
    traces: Array.from({ length: channels }, (_, i) => ({
      strings: {
        CHANNEL_NUMBER: String(i + 1),
        SAMPLE_INTERVAL: "0.00025",
        DELAY: delay,
        SOURCE_LOCATION: "-1",
        RECEIVER_LOCATION: String(i),
        STACK: "1",
      },
      samples: new Float32Array(ns).fill(i + 1),
    })),
  });
  return { name, sha256: "", bytes };
}

function folder(files: FieldFile[]): FieldFileSet {
  return { kind: "field-files", files };
}

function goodFolder(): FieldFile[] {
  const segy = writeGatherSetAsSegy({
    kind: "gathers",
    gathers: [1, 2].map((sp) => makeGather({ id: `r${sp}`, traceCount: 3, sampleCount: ns, sampleIntervalS: 0.0005, startTimeS: -0.002, sourceX: sp }, (t) => t)),
  });
  const truncated = seg2File("sp02-b1.sg2", 4);
  return [
    seg2File("sp01-b1.sg2", 4),
    { ...truncated, bytes: truncated.bytes.slice(0, truncated.bytes.length - 10) },
    seg2File("sp03-b1.SG2", 4),
    { name: "notes.txt", sha256: "", bytes: new TextEncoder().encode("wind picked up after noon") },
    { name: "qm1-geometry.csv", sha256: "", bytes: new TextEncoder().encode("file,source_point\n") },
    { name: "pair.dat", sha256: "", bytes: segy },
  ];
}

describe("import-records step", () => {
  it("has the documented defaults", () => {
    const p = importRecordsParams.parse({});
    expect(p).toEqual({ onBadFile: "stop", extensions: [".sg2", ".seg2", ".dat", ".sgy", ".segy"], component: "z", onNonFiniteSamples: "mark-dead" });
  });

  it("skips a bad file, records and logs it, and reads the others", async () => {
    const ctx = makeStepContext();
    const warn = vi.spyOn(ctx.log, "warn");
    const params = importRecordsParams.parse({ onBadFile: "skip" });
    const result = await importRecordsStep.run({ fieldFiles: folder(goodFolder()) }, params, ctx);
    const gathers = result.outputs.gathers!.gathers;
    expect(gathers.map((g) => g.id)).toEqual(["sp01-b1", "sp03-b1", "pair-r1", "pair-r2"]);
    const report = result.outputs.report!;
    expect(report.role).toBe("import");
    const data = report.data as ImportReport;
    expect(data.read.map((r) => [r.file, r.format, r.traces, r.samples])).toEqual([
      ["sp01-b1.sg2", "seg2", 4, ns],
      ["sp03-b1.SG2", "seg2", 4, ns],
      ["pair.dat", "segy", 6, ns],
    ]);
    expect(data.read[2].sampleIntervalS).toBeCloseTo(0.0005, 15);
    expect(data.rejected).toHaveLength(1);
    expect(data.rejected[0].file).toBe("sp02-b1.sg2");
    expect(data.rejected[0].reason).toContain("sp02-b1.sg2: byte");
    expect(typeof data.rejected[0].byteOffset).toBe("number");
    expect(data.ignored).toEqual(["notes.txt", "qm1-geometry.csv"]);
    expect(warn).toHaveBeenCalledTimes(1);
    expect(result.summary).toMatchObject({ filesRead: 3, filesRejected: 1, filesIgnored: 2, gathers: 4, traces: 14 });

    const g = gathers[0];
    expect(g.startTimeS).toBe(-0.01); // SEG-2 DELAY keyword
    expect(g.sampleIntervalS).toBe(0.00025);
    expect(g.traces.map((t) => t.receiverX)).toEqual([0, 1, 2, 3]);
    expect(g.traces[0]).toMatchObject({ sourceX: -1, sourcePoint: 0, blow: 0, stackCount: 1, component: "z", sourceFile: "sp01-b1.sg2" });
    expect(gathers[2].startTimeS).toBeCloseTo(-0.002, 12); // SEG-Y delay recording time
  });

  it("stops at the first bad file with an AppError naming the file and byte offset", async () => {
    const params = importRecordsParams.parse({});
    const err = await importRecordsStep.run({ fieldFiles: folder(goodFolder()) }, params, makeStepContext()).catch((e) => e);
    expect(err).toBeInstanceOf(AppError);
    expect(err.code).toBe("bad-file");
    expect(err.details.file).toBe("sp02-b1.sg2");
    expect(typeof err.details.byteOffset).toBe("number");
    expect(err.message).toMatch(/^sp02-b1\.sg2: byte \d+: /);
  });

  it("rejects a file that is neither SEG-2 nor SEG-Y at byte 0", async () => {
    const files = [seg2File("a.sg2", 2), { name: "junk.dat", sha256: "", bytes: new Uint8Array(5000).fill(7) }];
    const res = await importRecordsStep.run({ fieldFiles: folder(files) }, importRecordsParams.parse({ onBadFile: "skip" }), makeStepContext());
    const data = res.outputs.report!.data as ImportReport;
    expect(data.rejected).toEqual([expect.objectContaining({ file: "junk.dat", byteOffset: 0 })]);
  });

  it("honours the extensions list and the component", async () => {
    const files = [seg2File("a.sg2", 2), seg2File("b.raw", 2)];
    const res = await importRecordsStep.run(
      { fieldFiles: folder(files) },
      importRecordsParams.parse({ extensions: [".RAW"], component: "x" }),
      makeStepContext(),
    );
    expect(res.outputs.gathers!.gathers.map((g) => g.id)).toEqual(["b"]);
    expect(res.outputs.gathers!.gathers[0].traces[0].component).toBe("x");
    expect((res.outputs.report!.data as ImportReport).ignored).toEqual(["a.sg2"]);
  });

  it("fails clearly when nothing could be read", async () => {
    const files = [{ name: "x.sg2", sha256: "", bytes: new Uint8Array(3) }];
    await expect(importRecordsStep.run({ fieldFiles: folder(files) }, importRecordsParams.parse({ onBadFile: "skip" }), makeStepContext())).rejects.toThrow(/no field file could be read/);
  });
});
