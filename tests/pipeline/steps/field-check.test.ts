/**
 * The field-check step on the Quillmoor example's field data (the generator's own functions, its
 * default seed, the quick analytic waveforms, 16 source points and 0.3 s records to keep it
 * short): the faults the generator planted (a dead channel, noisy blows, two blows logged at the
 * wrong source point) are found, and nothing else is flagged. Then faults planted here on top
 * (a reversed channel, a late trigger, clipping, strong hum) are each found where they were put.
 */
import { beforeAll, describe, expect, it } from "vitest";
import { makeQuillmoorSurvey, type QuillmoorSurvey } from "../../../examples/quillmoor/make-field-data";
import { importRecordsParams, importRecordsStep } from "../../../pipeline/steps/import-records";
import { geometryParams, geometryStep } from "../../../pipeline/steps/geometry";
import { fieldCheckParams, fieldCheckStep, type FieldCheckReport } from "../../../pipeline/steps/field-check";
import type { GatherSet } from "../../../pipeline/types";
import { loadPipelineFile } from "../../../pipeline/pipeline-file";
import { makeStepContext } from "../../helpers/step-context";

let survey: QuillmoorSurvey;
let gathers: GatherSet;

/**
 * The analytic stand-in builds its surface wave by summing frequencies with their phase delays (its
 * own doc: not a solution of the wave equation), so within a few metres of the source a little of
 * it leaks ahead of its arrival, into the noise window. The solver-made field data of the demo do
 * not; here the noise is measured from 5 m offset on (the default is 1.5 m).
 */
const ANALYTIC = { noiseMinOffsetM: 5 };

async function check(set: GatherSet, settings: Record<string, unknown> = {}): Promise<FieldCheckReport> {
  const res = await fieldCheckStep.run({ gathers: set }, fieldCheckParams.parse({ ...ANALYTIC, ...settings }), makeStepContext());
  return res.outputs.report!.data as FieldCheckReport;
}

function copy(set: GatherSet): GatherSet {
  return { kind: "gathers", gathers: set.gathers.map((g) => ({ ...g, traces: g.traces.map((h) => ({ ...h })), data: g.data.slice() })) };
}

beforeAll(async () => {
  survey = makeQuillmoorSurvey({ sourcePoints: 16, recordLengthS: 0.3 });
  const ctx = makeStepContext();
  const fieldFiles = { kind: "field-files" as const, files: survey.files.map((f) => ({ ...f, sha256: "" })) };
  const imported = await importRecordsStep.run({ fieldFiles }, importRecordsParams.parse({}), ctx);
  // Positions from the crew's table, as the field check sees them on arrival.
  const placed = await geometryStep.run(
    { gathers: imported.outputs.gathers, geometryTable: { kind: "text", name: "qm1-geometry.csv", text: survey.geometryCsv } },
    geometryParams.parse({}),
    ctx,
  );
  gathers = placed.outputs.gathers!;
}, 120_000);

describe("field-check on the Quillmoor field data", () => {
  it("finds the dead channel, every noisy blow and both mislogged blows, and nothing else", async () => {
    const report = await check(gathers);
    const noisy = survey.faults.oddBlows.filter((b) => b.kind === "noisy").map((b) => b.file);
    // The seed plants at least one noisy blow and one weak one among the first 16 source points.
    expect(noisy.length).toBeGreaterThan(0);
    expect(survey.faults.oddBlows.some((b) => b.kind === "weak")).toBe(true);
    const found = report.findings.map((f) => `${f.kind} ${f.kind === "dead-channel" ? f.channel : f.file}`).sort();
    const planted = [
      `dead-channel ${survey.faults.deadChannel}`,
      ...noisy.map((f) => `noisy-blow ${f}`),
      ...survey.faults.mislogged.map((m) => `source-position ${m.file}`),
    ].sort();
    expect(found).toEqual(planted);
    // Each mislogged blow's position comes out within 0.5 m of where it was shot.
    for (const m of survey.faults.mislogged) {
      const f = report.findings.find((x) => x.kind === "source-position" && x.file === m.file)!;
      expect(Math.abs(f.value - (m.sourceX - m.loggedSourceX))).toBeLessThan(0.5);
      expect(f.verdict).toBe("reshoot");
    }
    // Verdicts: the planted faults need action before the crew leaves; every other record is ok.
    const flagged = new Set([...noisy, ...survey.faults.mislogged.map((m) => m.file)]);
    for (const s of report.shots) expect(s.verdict).toBe(flagged.has(s.file) ? "reshoot" : "ok");
    const dead = report.channelVerdicts.find((c) => c.channel === survey.faults.deadChannel)!;
    expect(dead.verdict).toBe("reshoot");
    expect(report.channelVerdicts.filter((c) => c.verdict !== "ok")).toHaveLength(1);
    // The grid: the dead channel's column is reshoot in every row.
    const col = report.channels.indexOf(survey.faults.deadChannel);
    for (let s = 0; s < report.shots.length; s++) expect(report.grid[s * report.channels.length + col]).toBe(2);
    expect(report.verdict).toBe("reshoot");
  });

  it("finds a reversed channel, a late trigger, clipped samples and strong hum where they were put", async () => {
    const set = copy(gathers);
    const ns = set.gathers[0].sampleCount;
    const dt = set.gathers[0].sampleIntervalS;
    const byId = (file: string) => set.gathers.find((g) => g.traces[0].sourceFile === file)!;
    // Channel 10 wired the wrong way round in every record.
    for (const g of set.gathers) {
      const t = g.traces.findIndex((h) => h.channel === 10);
      for (let k = 0; k < ns; k++) g.data[t * ns + k] *= -1;
    }
    // sp07-b2 triggered 5 ms early: the record starts late, every arrival comes 5 ms later
    // (clear of the 4 ms reshoot threshold, so the verdict does not hang on the last tenth of a ms).
    const late = byId("sp07-b2.sg2");
    const shift = Math.round(0.005 / dt);
    for (let t = 0; t < late.traces.length; t++) {
      const row = late.data.subarray(t * ns, (t + 1) * ns);
      row.copyWithin(shift, 0, ns - shift);
      row.fill(0, 0, shift);
    }
    // sp05-b1, channel 8: the recorder's full scale at a third of the trace's peak.
    const loud = byId("sp05-b1.sg2");
    const tc = loud.traces.findIndex((h) => h.channel === 8);
    let peak = 0;
    for (let k = 0; k < ns; k++) peak = Math.max(peak, Math.abs(loud.data[tc * ns + k]));
    for (let k = 0; k < ns; k++) loud.data[tc * ns + k] = Math.max(-peak / 3, Math.min(peak / 3, loud.data[tc * ns + k]));
    // sp09-b3, channel 40: a 50 Hz hum of 30 times the trace's RMS level (a line far above the
    // hammer's spectrum there: about 40 dB over its neighbouring bins by the Hann gains of Harris 1978).
    const hum = byId("sp09-b3.sg2");
    const th = hum.traces.findIndex((h) => h.channel === 40);
    let e = 0;
    for (let k = 0; k < ns; k++) e += hum.data[th * ns + k] ** 2;
    const humAmplitude = 30 * Math.sqrt(e / ns);
    for (let k = 0; k < ns; k++) hum.data[th * ns + k] += humAmplitude * Math.sin(2 * Math.PI * 50 * (hum.startTimeS + k * dt));

    const report = await check(set);
    const kinds = (kind: string) => report.findings.filter((f) => f.kind === kind);
    expect(kinds("reversed-channel").map((f) => f.channel)).toEqual([10]);
    const slip = kinds("trigger-slip");
    expect(slip.map((f) => f.file)).toEqual(["sp07-b2.sg2"]);
    // Measured on 1 ms block means with a parabola through the peak: within 0.3 ms of the 5 ms put in.
    expect(Math.abs(slip[0].value - 5)).toBeLessThan(0.3);
    expect(slip[0].verdict).toBe("reshoot");
    expect(kinds("clipped").map((f) => [f.file, f.channel])).toEqual([["sp05-b1.sg2", 8]]);
    expect(kinds("mains-hum").map((f) => [f.file, f.channel])).toEqual([["sp09-b3.sg2", 40]]);
    expect(kinds("mains-hum")[0].message).toMatch(/at 50 Hz/);
    // The planted field faults are still found alongside.
    expect(kinds("dead-channel")).toHaveLength(1);
    expect(kinds("source-position")).toHaveLength(survey.faults.mislogged.length);
  });

  it("refuses stacked records, naming the record", async () => {
    const set = copy(gathers);
    set.gathers[0].traces.forEach((h) => {
      h.stackCount = 4;
      h.blow = 0;
    });
    await expect(check(set)).rejects.toThrow(/record "[^"]+" is a vertical stack .*put it before vertical-stack/);
  });

  it("refuses settings out of order, naming the setting", () => {
    const r = fieldCheckParams.safeParse({ sourceWarnM: 2, sourceReshootM: 1 });
    expect(r.success).toBe(false);
    expect(r.error!.issues[0].path).toEqual(["sourceReshootM"]);
  });

  it("runs from the example's pipeline file for the watcher: raw blows, positions from the crew's table", () => {
    const { resolved } = loadPipelineFile(new URL("../../../examples/quillmoor/qm1-field-check.yaml", import.meta.url).pathname);
    expect(resolved.steps.map((s) => s.stepId)).toEqual(["import-records", "geometry", "field-check"]);
    expect(resolved.steps[1].params.positionsFrom).toBe("table");
  });
});
