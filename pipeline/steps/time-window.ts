/**
 * Step "time-window": applies the recorder's trigger delay (so time zero is the source instant),
 * resamples to another sample interval with an anti-alias filter, and cuts a time window.
 */
import { z } from "zod";
import { defineStep, StepInputError, throwIfAborted } from "../step";
import type { Gather, GatherSet } from "../types";
import { resampleTraces, shiftTraces, type TimeGrid } from "../kernels/resample";
import { transformTraceBlocks } from "../workers/trace-blocks";

export const timeWindowParams = z
  .object({
    /** @default 0 */
    triggerDelayMs: z
      .number()
      .default(0)
      .describe("Time from the source instant to the recorder's trigger, ms (positive when the trigger fired late); added to every sample time so that time zero is the source instant"),
    /** @default null */
    startMs: z.number().nullable().default(null).describe("Start of the window, ms after the source (null: keep the first sample); samples before the record are zero"),
    /** @default null */
    endMs: z.number().nullable().default(null).describe("End of the window, ms after the source (null: keep the last sample); samples after the record are zero"),
    /** @default null */
    resampleIntervalMs: z.number().positive().nullable().default(null).describe("New sample interval, ms (null: keep); a longer interval is preceded by a zero-phase Butterworth anti-alias low-pass"),
    /** @default 0.8 */
    antiAliasFraction: z.number().gt(0).lt(1).default(0.8).describe("Corner of the anti-alias low-pass as a fraction of the new Nyquist frequency"),
  })
  .superRefine((p, ctx) => {
    if (p.startMs !== null && p.endMs !== null && !(p.endMs > p.startMs)) {
      ctx.addIssue({ code: "custom", path: ["endMs"], message: `endMs (${p.endMs}) must be after startMs (${p.startMs}): the window would be empty or negative` });
    }
  });

export type TimeWindowParams = z.output<typeof timeWindowParams>;

interface GatherPlan {
  grid: TimeGrid;
  /** Whole-sample shift when the interval is kept (no interpolation), else null. */
  shift: number | null;
  delayedStartS: number;
}

function planGather(g: Gather, p: TimeWindowParams): GatherPlan {
  const dt = g.sampleIntervalS;
  const t0 = g.startTimeS + p.triggerDelayMs / 1000;
  const lastS = t0 + (g.sampleCount - 1) * dt;
  const newDt = p.resampleIntervalMs === null ? dt : p.resampleIntervalMs / 1000;
  const sameInterval = Math.abs(newDt - dt) <= 1e-9 * dt;
  let startS = p.startMs === null ? t0 : p.startMs / 1000;
  const endS = p.endMs === null ? lastS : p.endMs / 1000;
  let shift: number | null = null;
  if (sameInterval) {
    // Keep the original samples: the start snaps to the nearest sample of the record's grid.
    shift = Math.round((startS - t0) / dt);
    startS = t0 + shift * dt;
  }
  const count = Math.floor((endS - startS) / newDt + 1e-6) + 1;
  if (count < 1) throw new StepInputError(`the window ${(startS * 1000).toFixed(3)} … ${(endS * 1000).toFixed(3)} ms holds no sample of gather "${g.id}"`, "endMs");
  if (endS < t0 || startS > lastS) {
    throw new StepInputError(
      `the window ${(startS * 1000).toFixed(3)} … ${(endS * 1000).toFixed(3)} ms lies outside gather "${g.id}" (${(t0 * 1000).toFixed(3)} … ${(lastS * 1000).toFixed(3)} ms after the trigger delay)`,
      p.startMs !== null && startS > lastS ? "startMs" : "endMs",
    );
  }
  return { grid: { startTimeS: startS, sampleIntervalS: newDt, sampleCount: count }, shift: sameInterval ? shift : null, delayedStartS: t0 };
}

export const timeWindowStep = defineStep({
  id: "time-window",
  version: 1,
  title: "Time window, resampling, trigger delay",
  description:
    "Shifts the time axis by the recorder's trigger delay so time zero is the source instant, resamples to another interval " +
    "(windowed-sinc interpolation, after a zero-phase Butterworth anti-alias low-pass when the interval grows) and cuts a time window " +
    "(zero-padded where it reaches beyond the record).",
  reads: ["gathers"],
  writes: ["gathers"],
  params: timeWindowParams,
  async run(input, params, ctx) {
    const set = input.gathers as GatherSet;
    const plans = set.gathers.map((g) => planGather(g, params));
    const out: Gather[] = [];
    let resampled = 0;
    for (let gi = 0; gi < set.gathers.length; gi++) {
      throwIfAborted(ctx.signal);
      const g = set.gathers[gi];
      const { grid, shift, delayedStartS } = plans[gi];
      let data: Float32Array;
      if (shift !== null) data = shiftTraces(g.data, g.traces.length, g.sampleCount, shift, grid.sampleCount);
      else {
        resampled++;
        data = await transformTraceBlocks(ctx, g.data, g.traces.length, g.sampleCount, {
          local: (block, tc) => resampleTraces(block, tc, g.sampleCount, delayedStartS, g.sampleIntervalS, grid, params.antiAliasFraction),
          remote: (pool, block, tc) =>
            pool.run(
              "resampleTraceBlock",
              { data: block, traceCount: tc, sampleCount: g.sampleCount, startTimeS: delayedStartS, sampleIntervalS: g.sampleIntervalS, grid, antiAliasFraction: params.antiAliasFraction },
              { transfer: [block.buffer as ArrayBuffer], signal: ctx.signal },
            ),
        });
      }
      out.push({ ...g, startTimeS: grid.startTimeS, sampleIntervalS: grid.sampleIntervalS, sampleCount: grid.sampleCount, data });
      ctx.progress((gi + 1) / set.gathers.length, g.id);
    }
    const first = out[0];
    ctx.log.info(
      { gathers: out.length, resampled, triggerDelayMs: params.triggerDelayMs },
      first
        ? `windowed ${out.length} gathers to ${(first.startTimeS * 1000).toFixed(3)} … ${((first.startTimeS + (first.sampleCount - 1) * first.sampleIntervalS) * 1000).toFixed(3)} ms at ${first.sampleIntervalS * 1000} ms (${resampled} resampled)`
        : "no gathers",
    );
    return {
      outputs: { gathers: { kind: "gathers", gathers: out } },
      summary: {
        gathers: out.length,
        resampled,
        triggerDelayMs: params.triggerDelayMs,
        sampleIntervalMs: first ? first.sampleIntervalS * 1000 : null,
        sampleCount: first ? first.sampleCount : null,
        startMs: first ? first.startTimeS * 1000 : null,
      },
    };
  },
});

export default timeWindowStep;
