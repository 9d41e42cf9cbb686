/**
 * The first-arrivals step with hand edits (`pickEdits`): applied after the automatic picker,
 * marked as hand picks, counted in the summary, refused with the edit's field when they name
 * something the gathers do not hold. Editing semantics: common practice of interactive picking
 * (the processor's pick stands over the automatic one).
 */
import { describe, expect, it } from "vitest";
import { firstArrivalsStep } from "../../../pipeline/steps/first-arrivals";
import { StepInputError } from "../../../pipeline/step";
import { makeStepContext } from "../../helpers/step-context";
import { refractionGather } from "./make-gather";

describe("first-arrivals step: hand edits", () => {
  it("moves a flagged pick, deletes one and adds one beyond maxOffsetM; hand picks are marked, unflagged, of quality 1", async () => {
    const { set, onsets } = refractionGather();
    const base = { maxOffsetM: 40 };
    const auto = await firstArrivalsStep.run({ gathers: set }, firstArrivalsStep.params.parse(base), makeStepContext());
    const autoPicks = auto.outputs.picks!.picks;
    expect(autoPicks.find((p) => p.traceIndex === 30)?.flagged).toBe(true);
    expect(autoPicks.every((p) => p.origin === "automatic")).toBe(true);
    // Offsets 1 … 40 m are picked; channel 46 (offset 46 m) is not.
    expect(autoPicks.some((p) => p.traceIndex === 45)).toBe(false);

    const movedMs = 1000 * (Math.abs(set.gathers[0].traces[30].offset) / 400);
    const addedMs = 1000 * onsets[45];
    const edits = [
      { gather: "sp01", channel: 31, action: "moved" as const, timeMs: movedMs },
      { gather: "sp01", channel: 6, action: "deleted" as const },
      { gather: "sp01", channel: 46, action: "added" as const, timeMs: addedMs },
    ];
    const res = await firstArrivalsStep.run({ gathers: set }, firstArrivalsStep.params.parse({ ...base, pickEdits: edits }), makeStepContext());
    const picks = res.outputs.picks!.picks;
    const at = (t: number) => picks.find((p) => p.traceIndex === t);
    expect(at(30)).toMatchObject({ origin: "hand", flagged: false, quality: 1 });
    expect(at(30)!.timeS).toBeCloseTo(movedMs / 1000, 12);
    expect(at(5)).toBeUndefined();
    expect(at(45)).toMatchObject({ origin: "hand", flagged: false });
    expect(at(45)!.timeS).toBeCloseTo(addedMs / 1000, 12);
    // Every other pick is the automatic one, unchanged.
    for (const p of autoPicks.filter((q) => q.traceIndex !== 30 && q.traceIndex !== 5)) {
      expect(at(p.traceIndex)).toMatchObject({ timeS: p.timeS, origin: "automatic" });
    }
    expect(picks).toHaveLength(autoPicks.length);
    expect(res.summary).toMatchObject({ handEdits: 3, handMoved: 1, handAdded: 1, handDeleted: 1, flagged: 0 });
    // The travel-time series names hand picks so the chart can draw them apart.
    expect(res.series![0].points.filter((q) => q.group === "sp01 (hand)")).toHaveLength(2);
  });

  it("refuses edits of an unknown gather or channel and times outside the record, naming the edit's field", async () => {
    const { set } = refractionGather();
    const run = (pickEdits: unknown[]) => firstArrivalsStep.run({ gathers: set }, firstArrivalsStep.params.parse({ pickEdits }), makeStepContext()).catch((e) => e);
    const gather = await run([{ gather: "sp01", channel: 2, action: "deleted" }, { gather: "sp09", channel: 2, action: "deleted" }]);
    expect(gather).toBeInstanceOf(StepInputError);
    expect(gather.field).toBe("pickEdits.1.gather");
    expect(gather.message).toMatch(/pickEdits\[1\] names gather "sp09".*sp01/);
    const channel = await run([{ gather: "sp01", channel: 49, action: "moved", timeMs: 20 }]);
    expect(channel.field).toBe("pickEdits.0.channel");
    expect(channel.message).toMatch(/channels 1 to 48/);
    // The record runs from −10 ms to −10 + 1599 × 0.25 = 389.75 ms.
    const late = await run([{ gather: "sp01", channel: 3, action: "added", timeMs: 390 }]);
    expect(late.field).toBe("pickEdits.0.timeMs");
    expect(late.message).toMatch(/outside the record \(-10\.000 … 389\.750 ms\)/);
    const early = await run([{ gather: "sp01", channel: 3, action: "moved", timeMs: -10.5 }]);
    expect(early.field).toBe("pickEdits.0.timeMs");
    // A move without a time is refused by the settings schema, at the edit's path.
    const noTime = firstArrivalsStep.params.safeParse({ pickEdits: [{ gather: "sp01", channel: 3, action: "moved" }] });
    expect(noTime.success).toBe(false);
    expect(noTime.error?.issues[0].path).toEqual(["pickEdits", 0, "timeMs"]);
  });
});
