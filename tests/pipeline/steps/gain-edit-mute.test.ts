import { describe, expect, it } from "vitest";
import { gainStep } from "../../../pipeline/steps/gain";
import { traceEditStep } from "../../../pipeline/steps/trace-edit";
import { muteStep } from "../../../pipeline/steps/mute";
import { StepInputError } from "../../../pipeline/step";
import type { GatherSet, PickSet } from "../../../pipeline/types";
import { makeStepContext } from "../../helpers/step-context";
import { seededRandom } from "../../helpers/random";
import { makeGather } from "./make-gather";

const rnd = seededRandom(77);
const gathers = (): GatherSet => ({
  kind: "gathers",
  gathers: [
    makeGather({ id: "sp01", sourcePoint: 1, traceCount: 6, sampleCount: 400, sampleIntervalS: 0.001 }, () => 5 * rnd.gaussian()),
    makeGather({ id: "sp03", sourcePoint: 3, sourceX: 3, traceCount: 6, sampleCount: 400, sampleIntervalS: 0.001 }, () => rnd.gaussian()),
  ],
});

describe("gain step", () => {
  it("summarises only the setting its kind uses", async () => {
    const agc = await gainStep.run({ gathers: gathers() }, gainStep.params.parse({ kind: "agc", agcWindowMs: 80 }), makeStepContext());
    expect(agc.summary).toEqual({ kind: "agc", agcWindowMs: 80, gathers: 2, traces: 12 });
    const power = await gainStep.run({ gathers: gathers() }, gainStep.params.parse({ kind: "time-power", timePower: 1.5 }), makeStepContext());
    expect(power.summary).toEqual({ kind: "time-power", timePower: 1.5, gathers: 2, traces: 12 });
  });


  it("records the kind and the per-trace factors that undo a normalisation", async () => {
    const input = gathers();
    const res = await gainStep.run({ gathers: input }, gainStep.params.parse({ kind: "trace-max" }), makeStepContext());
    expect(res.summary).toMatchObject({ kind: "trace-max", traces: 12 });
    // A normalisation uses neither the AGC window nor a time power: the summary does not name them.
    expect(Object.keys(res.summary!)).not.toContain("agcWindowMs");
    expect(Object.keys(res.summary!)).not.toContain("timePower");
    const report = res.outputs.report!;
    expect(report.role).toBe("gain");
    const record = report.data as { kind: string; traceFactors: Array<{ gatherId: string; factors: number[] }> };
    expect(record.kind).toBe("trace-max");
    const g = res.outputs.gathers!.gathers[1];
    const f = record.traceFactors[1].factors[2];
    // Dividing by the recorded factor gives back the input sample.
    expect(g.data[2 * 400 + 17] / f).toBeCloseTo(input.gathers[1].data[2 * 400 + 17], 4);
    let peak = 0;
    for (let i = 0; i < 400; i++) peak = Math.max(peak, Math.abs(g.data[2 * 400 + i]));
    expect(peak).toBeCloseTo(1, 6);
  });

  it("AGC and time power record their settings, and bad windows are refused by the schema", async () => {
    const res = await gainStep.run({ gathers: gathers() }, gainStep.params.parse({ kind: "agc", agcWindowMs: 40 }), makeStepContext());
    expect(res.outputs.report!.data).toMatchObject({ kind: "agc", agcWindowMs: 40, timePower: null, traceFactors: null });
    const bad = gainStep.params.safeParse({ kind: "agc", agcWindowMs: -5 });
    expect(bad.success).toBe(false);
    expect(bad.error?.issues[0].path).toEqual(["agcWindowMs"]);
    expect(gainStep.params.safeParse({ kind: "loudness" }).success).toBe(false);
  });
});

describe("trace-edit step", () => {
  it("kills and reverses by source point and channel, and lists unmatched entries", async () => {
    const input = gathers();
    const params = traceEditStep.params.parse({ kill: [{ sourcePoint: 3, channels: [2] }, { sourcePoint: 9, channels: [1] }], reversePolarity: [{ sourcePoint: 1, channels: [4, 5] }] });
    const res = await traceEditStep.run({ gathers: input }, params, makeStepContext());
    const [a, b] = res.outputs.gathers!.gathers;
    expect(b.traces[1].dead).toBe(true);
    expect(b.data.subarray(400, 800).every((x) => x === 0)).toBe(true);
    expect(a.data[3 * 400 + 10]).toBe(-input.gathers[0].data[3 * 400 + 10]);
    expect(a.data[10]).toBe(input.gathers[0].data[10]);
    expect(res.summary).toMatchObject({ killed: 1, reversed: 2, unmatched: ["9:1"] });
  });

  it("refuses a trace that is both killed and reversed, naming the entry", () => {
    const r = traceEditStep.params.safeParse({ kill: [{ sourcePoint: 1, channels: [3] }], reversePolarity: [{ sourcePoint: 1, channels: [3] }] });
    expect(r.success).toBe(false);
    expect(r.error?.issues[0].path).toEqual(["reversePolarity", 0, "channels"]);
  });
});

describe("mute step", () => {
  it("mutes before a line and keeps the line as an artifact", async () => {
    const input = gathers();
    const params = muteStep.params.parse({ topMute: "line", topInterceptMs: 20, topVelocityMps: 100, taperMs: 5 });
    const res = await muteStep.run({ gathers: input }, params, makeStepContext());
    const g = res.outputs.gathers!.gathers[0];
    const line = res.outputs.mutes!.lines.find((l) => l.gatherId === "sp01" && l.role === "top")!;
    // Trace 2: receiver at 2 m, source at −1 m → |offset| 3 m → 20 + 30 = 50 ms.
    expect(line.timesS[2]).toBeCloseTo(0.05, 6);
    expect(Math.abs(g.data[2 * 400 + 44])).toBe(0); // before line − taper (45 ms)
    expect(g.data[2 * 400 + 50]).toBe(input.gathers[0].data[2 * 400 + 50]);
    expect(res.summary).toMatchObject({ mutedTraces: 12, traces: 12 });
    expect(g.traces).toBe(input.gathers[0].traces);
  });

  it("mutes before picks less a margin, interpolating traces without a usable pick", async () => {
    const input = gathers();
    const picks: PickSet = {
      kind: "picks",
      method: "energy-ratio",
      picks: [0, 1, 3, 4, 5].map((t) => ({ gatherId: "sp01", traceIndex: t, timeS: 0.1 + 0.01 * t, quality: 1, flagged: t === 4 })),
    };
    const params = muteStep.params.parse({ topMute: "picks", pickMarginMs: 10, taperMs: 0 });
    const res = await muteStep.run({ gathers: input, picks }, params, makeStepContext());
    const line = res.outputs.mutes!.lines.find((l) => l.gatherId === "sp01" && l.role === "top")!;
    expect(line.timesS[0]).toBeCloseTo(0.09, 6);
    expect(line.timesS[2]).toBeCloseTo(0.11, 6); // between traces 1 and 3 (offsets 2 and 4 m)
    expect(line.timesS[4]).toBeCloseTo(0.13, 6); // flagged pick replaced: half-way between traces 3 (0.12 s) and 5 (0.14 s)
    expect(res.summary).toMatchObject({ interpolatedPicks: 2, gathersWithoutPicks: ["sp03"] });
  });

  it("needs picks for a pick mute and refuses empty windows before any work", async () => {
    const ctx = makeStepContext();
    const err = await muteStep.run({ gathers: gathers() }, muteStep.params.parse({ topMute: "picks" }), ctx).catch((e) => e);
    expect(err).toBeInstanceOf(StepInputError);
    expect(err.message).toMatch(/run the first-arrivals step before mute/);
    expect(ctx.progressCalls).toHaveLength(0);
    const bad = muteStep.params.safeParse({ windows: [{ startMs: 50, endMs: 40 }] });
    expect(bad.success).toBe(false);
    expect(bad.error?.issues[0].path).toEqual(["windows", 0, "endMs"]);
  });
});
