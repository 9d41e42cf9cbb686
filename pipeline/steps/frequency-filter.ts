/**
 * Step "frequency-filter": Butterworth band-pass, low-pass or high-pass of a chosen order,
 * zero-phase (forward and backward) or causal, with an optional notch comb for 50 or 60 Hz mains
 * hum and its harmonics. Trace ends get a cosine taper before filtering.
 */
import { z } from "zod";
import { defineStep, StepInputError, throwIfAborted } from "../step";
import type { Gather, GatherSet } from "../types";
import { filterTraces, mainsHumLines, planFrequencyFilter, type FrequencyFilterDesign } from "../kernels/filter";
import { transformTraceBlocks } from "../workers/trace-blocks";

export const frequencyFilterParams = z
  .object({
    /** @default "band-pass" */
    passBand: z
      .enum(["band-pass", "low-pass", "high-pass", "none"])
      .default("band-pass")
      .describe('Pass band: "band-pass" (lowCutHz to highCutHz), "low-pass" (below highCutHz), "high-pass" (above lowCutHz) or "none" (notches only)'),
    /** @default 5 */
    lowCutHz: z.number().positive().default(5).describe("Low corner, Hz: −3 dB point of the high-pass part (per pass)"),
    /** @default 120 */
    highCutHz: z.number().positive().default(120).describe("High corner, Hz: −3 dB point of the low-pass part (per pass); must lie below Nyquist"),
    /** @default 4 */
    order: z
      .number()
      .int()
      .min(1)
      .max(8)
      .default(4)
      .describe("Butterworth order of each part, per pass; zero-phase filtering runs it forward and backward, so the effective order doubles"),
    /** @default "zero" */
    phase: z
      .enum(["zero", "causal"])
      .default("zero")
      .describe('"zero": forward and backward, no delay, response squared (−6 dB at the corners); "causal": forward only, as an analog recorder filter'),
    /** @default 0 */
    mainsHz: z
      .union([z.literal(0), z.literal(50), z.literal(60)])
      .default(0)
      .describe("Mains frequency to notch out, Hz: 50 or 60; 0 for no notch"),
    /** @default 3 */
    mainsLines: z
      .number()
      .int()
      .min(1)
      .max(40)
      .default(3)
      .describe("Number of hum lines to notch: the fundamental and its harmonics (3 → 50, 100, 150 Hz); lines at or above Nyquist are skipped"),
    /** @default 2 */
    notchWidthHz: z.number().positive().default(2).describe("Width of each notch at −3 dB, Hz"),
    /** @default 20 */
    taperMs: z.number().min(0).default(20).describe("Cosine taper at each trace end before filtering, ms"),
  })
  .superRefine((p, ctx) => {
    if (p.passBand === "band-pass" && p.lowCutHz >= p.highCutHz) {
      ctx.addIssue({ code: "custom", path: ["lowCutHz"], message: `lowCutHz (${p.lowCutHz} Hz) must be below highCutHz (${p.highCutHz} Hz)` });
    }
    if (p.mainsHz > 0 && p.notchWidthHz >= p.mainsHz) {
      ctx.addIssue({ code: "custom", path: ["notchWidthHz"], message: `notchWidthHz (${p.notchWidthHz} Hz) must be below mainsHz (${p.mainsHz} Hz)` });
    }
    if (p.passBand === "none" && p.mainsHz === 0) {
      ctx.addIssue({ code: "custom", path: ["passBand"], message: 'passBand "none" with mainsHz 0 would do nothing: choose a pass band or a mains frequency' });
    }
  });

export type FrequencyFilterParams = z.output<typeof frequencyFilterParams>;

/** The kernel design for one gather's sample interval; throws StepInputError on corners at or above Nyquist. */
export function designForGather(p: FrequencyFilterParams, gather: Gather): FrequencyFilterDesign {
  const nyquist = 1 / (2 * gather.sampleIntervalS);
  const where = `gather "${gather.id}" (sample interval ${gather.sampleIntervalS * 1000} ms, Nyquist ${nyquist} Hz)`;
  if ((p.passBand === "band-pass" || p.passBand === "high-pass") && p.lowCutHz >= nyquist) {
    throw new StepInputError(`lowCutHz ${p.lowCutHz} Hz is at or above the Nyquist frequency of ${where}`, "lowCutHz");
  }
  if ((p.passBand === "band-pass" || p.passBand === "low-pass") && p.highCutHz >= nyquist) {
    throw new StepInputError(`highCutHz ${p.highCutHz} Hz is at or above the Nyquist frequency of ${where}; choose a corner below ${nyquist} Hz`, "highCutHz");
  }
  // Keep notches clear of Nyquist by their half width so each notch is a complete one.
  const notchesHz = p.mainsHz > 0 ? mainsHumLines(p.mainsHz, p.mainsLines, nyquist - p.notchWidthHz) : [];
  if (p.mainsHz > 0 && notchesHz.length === 0) {
    throw new StepInputError(`mainsHz ${p.mainsHz} Hz is too close to or above the Nyquist frequency of ${where}`, "mainsHz");
  }
  return {
    passBand: p.passBand,
    lowCutHz: p.lowCutHz,
    highCutHz: p.highCutHz,
    order: p.order,
    zeroPhase: p.phase === "zero",
    notchesHz,
    notchWidthHz: p.notchWidthHz,
  };
}

export const frequencyFilterStep = defineStep({
  id: "frequency-filter",
  version: 1,
  title: "Frequency filter (Butterworth, mains notch)",
  description:
    "Butterworth band-pass, low-pass or high-pass (bilinear transform with prewarping, biquad cascade) of a chosen order, " +
    "zero-phase by forward-and-backward filtering (the effective order doubles and the corners sit at −6 dB) or causal; " +
    "an optional notch at 50 or 60 Hz mains hum and its harmonics. Each trace gets a cosine taper at both ends first.",
  reads: ["gathers"],
  writes: ["gathers"],
  params: frequencyFilterParams,
  async run(input, params, ctx) {
    const set = input.gathers as GatherSet;
    // Every data-dependent check before any work.
    const designs = set.gathers.map((g) => designForGather(params, g));
    const out: Gather[] = [];
    let traces = 0;
    for (let gi = 0; gi < set.gathers.length; gi++) {
      throwIfAborted(ctx.signal);
      const g = set.gathers[gi];
      const plan = planFrequencyFilter(designs[gi], g.sampleIntervalS, g.sampleCount);
      const taperSamples = Math.round((params.taperMs / 1000) / g.sampleIntervalS);
      const data = await transformTraceBlocks(ctx, g.data, g.traces.length, g.sampleCount, {
        local: (block, traceCount) => filterTraces({ data: block, traceCount, sampleCount: g.sampleCount, plan, taperSamples }),
        remote: (pool, block, traceCount) =>
          pool.run("filterTraceBlock", { data: block, traceCount, sampleCount: g.sampleCount, plan, taperSamples }, { transfer: [block.buffer as ArrayBuffer], signal: ctx.signal }),
      });
      out.push({ ...g, data });
      traces += g.traces.length;
      ctx.progress((gi + 1) / set.gathers.length, g.id);
    }
    const notchesHz = designs[0]?.notchesHz ?? [];
    const effectiveOrder = params.phase === "zero" ? 2 * params.order : params.order;
    ctx.log.info(
      { gathers: out.length, traces, passBand: params.passBand, effectiveOrder, notchesHz },
      `filtered ${traces} traces in ${out.length} gathers (${params.passBand}, ${params.phase} phase, effective order ${effectiveOrder})`,
    );
    return {
      outputs: { gathers: { kind: "gathers", gathers: out } },
      summary: {
        gathers: out.length,
        traces,
        passBand: params.passBand,
        lowCutHz: params.passBand === "band-pass" || params.passBand === "high-pass" ? params.lowCutHz : null,
        highCutHz: params.passBand === "band-pass" || params.passBand === "low-pass" ? params.highCutHz : null,
        phase: params.phase,
        effectiveOrder,
        notchesHz,
      },
    };
  },
});

export default frequencyFilterStep;
