/**
 * The Quillmoor example generator: layout of the invented survey (demo scenario), determinism,
 * readability by our own readers, and the deliberate geometry-table mistake. Smaller options keep
 * the test quick; the layout rules are the same as the full survey's.
 */
import { describe, expect, it } from "vitest";
import { blowFileName, makeQuillmoorSurvey, traceSynthesiser } from "../../../examples/quillmoor/make-field-data";
import { parseGeometryTable } from "../../../pipeline/io/geometry-table";
import { readSeg2, seg2ToGather } from "../../../pipeline/io/seg2";
import { importRecordsParams, importRecordsStep } from "../../../pipeline/steps/import-records";
import { makeStepContext } from "../../helpers/step-context";

const small = { sourcePoints: 15, recordLengthS: 0.06 };

describe("makeQuillmoorSurvey", () => {
  const survey = makeQuillmoorSurvey(small);

  it("writes one SEG-2 file per blow with the scenario's names", () => {
    expect(survey.files).toHaveLength(60);
    expect(survey.files[0].name).toBe("sp01-b1.sg2");
    expect(survey.files[59].name).toBe("sp15-b4.sg2");
    expect(blowFileName(26, 4)).toBe("sp26-b4.sg2");
  });

  it("is deterministic for a seed and changes with it", () => {
    const again = makeQuillmoorSurvey(small);
    expect(again.files.every((f, i) => Buffer.from(f.bytes).equals(Buffer.from(survey.files[i].bytes)))).toBe(true);
    const other = makeQuillmoorSurvey({ ...small, seed: 1 });
    expect(Buffer.from(other.files[0].bytes).equals(Buffer.from(survey.files[0].bytes))).toBe(false);
  });

  it("carries the true positions, sampling and pre-trigger in the keywords", () => {
    const f = survey.files.find((x) => x.name === "sp14-b3.sg2")!;
    const g = seg2ToGather(readSeg2(f.bytes, f.name), f.name, { id: "sp14-b3", sourceFile: f.name });
    expect(g.sampleIntervalS).toBe(0.00025);
    expect(g.startTimeS).toBe(-0.01);
    expect(g.sampleCount).toBe(240);
    expect(g.traces).toHaveLength(48);
    expect(g.traces[0].sourceX).toBe(25); // source point 14: −1 + 13 · 2 m
    expect(g.traces.map((t) => t.receiverX)).toEqual(Array.from({ length: 48 }, (_, i) => i));
    expect(g.traces.filter((t) => t.dead).map((t) => t.channel)).toEqual([31]);
  });

  it("logs blows 3 and 4 of source point 14 at source point 15 in the geometry table", () => {
    const table = parseGeometryTable(survey.geometryCsv, "qm1-geometry.csv");
    expect(table.form).toBe("spread");
    const entry = (file: string) => table.files.find((e) => e.file === file)!;
    expect([entry("sp14-b2.sg2").sourcePoint, entry("sp14-b2.sg2").sourceX]).toEqual([14, 25]);
    expect([entry("sp14-b3.sg2").sourcePoint, entry("sp14-b3.sg2").sourceX]).toEqual([15, 27]);
    expect([entry("sp14-b4.sg2").sourcePoint, entry("sp14-b4.sg2").sourceX]).toEqual([15, 27]);
    expect(entry("sp15-b1.sg2").sourceX).toBe(27);
    expect(table.files).toHaveLength(60);
  });

  it("reads through the import step", async () => {
    const fieldFiles = { kind: "field-files" as const, files: survey.files.map((f) => ({ ...f, sha256: "" })) };
    const res = await importRecordsStep.run({ fieldFiles }, importRecordsParams.parse({}), makeStepContext());
    expect(res.outputs.gathers!.gathers).toHaveLength(60);
  });
});

describe("traceSynthesiser", () => {
  it("puts the direct P onset at offset / 400 m/s and nothing before it", () => {
    // Scenario: Vp 400 m/s above the water table; the Berlage source pulse is causal (Aldridge
    // 1990), so the trace is zero before the first arrival apart from the ringing of the surface
    // wave's band-limited frequency sum (4–90 Hz, tapered ends), which must stay below 2 % of the
    // trace peak (measured about 1.2 %; 2 % leaves room without hiding a misplaced arrival, which
    // would reach tens of per cent).
    const dt = 0.00025;
    const t0 = -0.01;
    const ns = 400;
    const x = 8;
    const g = traceSynthesiser({ sourceX: 0, receiverX: [x], startTimeS: t0, sampleIntervalS: dt, sampleCount: ns });
    let peak = 0;
    for (let k = 0; k < ns; k++) peak = Math.max(peak, Math.abs(g[k]));
    const onset = Math.round((x / 400 - t0) / dt);
    let before = 0;
    for (let k = 0; k < onset - 2; k++) before = Math.max(before, Math.abs(g[k]));
    expect(before).toBeLessThan(0.02 * peak);
    let after = 0;
    for (let k = onset; k < onset + 40; k++) after = Math.max(after, Math.abs(g[k]));
    expect(after).toBeGreaterThan(before * 5);
  });
});
