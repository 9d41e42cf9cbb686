/**
 * Step "line-source": converts point-source (hammer) traces to equivalent line-source traces for
 * comparison with 2D modelling (Forbriger, Groos & Schäfer 2014, Geophys. J. Int. 198): the
 * single-velocity transformation √(2 r v) · (u ∗ 1/√t) or the direct-wave transformation
 * r √2 · t^(−1/2) · (u ∗ 1/√t). See pipeline/kernels/line-source.ts for the derivation.
 */
import { z } from "zod";
import { defineStep, StepInputError, throwIfAborted } from "../step";
import type { Gather, GatherSet } from "../types";
import { lineSourceTraces } from "../kernels/line-source";
import { transformTraceBlocks } from "../workers/trace-blocks";

export const lineSourceParams = z.object({
  /** @default "direct-wave" */
  method: z
    .enum(["direct-wave", "single-velocity"])
    .default("direct-wave")
    .describe('"direct-wave": r√2 · t^(−1/2) · (u ∗ 1/√t), no velocity needed; "single-velocity": √(2 r v) · (u ∗ 1/√t) with v = velocityMps'),
  /** @default 200 */
  velocityMps: z.number().positive().default(200).describe("Velocity of the single-velocity transformation, m/s (e.g. the Rayleigh-wave phase velocity that dominates the data)"),
});

export type LineSourceParams = z.output<typeof lineSourceParams>;

export const lineSourceStep = defineStep({
  id: "line-source",
  version: 2,
  title: "Point-to-line-source conversion",
  description:
    "Converts point-source traces to line-source traces for 2D modelling (Forbriger, Groos & Schäfer 2014): convolution with 1/√t " +
    "and an offset-dependent factor, either √(2 r v) for one velocity or r√2 / √t (direct-wave transformation). Samples before the " +
    "source instant are set to zero; traces at zero source-receiver distance become zero.",
  reads: ["gathers"],
  writes: ["gathers"],
  params: lineSourceParams,
  async run(input, params, ctx) {
    const set = input.gathers as GatherSet;
    for (const g of set.gathers) {
      if (g.startTimeS + (g.sampleCount - 1) * g.sampleIntervalS <= 0) {
        throw new StepInputError(`gather "${g.id}" ends before the source instant; apply the trigger delay (time-window step) first`, "gathers");
      }
    }
    const out: Gather[] = [];
    let zeroDistance = 0;
    for (let gi = 0; gi < set.gathers.length; gi++) {
      throwIfAborted(ctx.signal);
      const g = set.gathers[gi];
      // Source-receiver distance including depths (the Green's functions depend on distance).
      const distances = Float64Array.from(g.traces, (h) => Math.hypot(h.receiverX - h.sourceX, h.receiverZ - h.sourceZ));
      zeroDistance += distances.filter((d) => d === 0).length;
      const args = (block: Float32Array, tc: number, first: number) => ({
        data: block,
        traceCount: tc,
        sampleCount: g.sampleCount,
        startTimeS: g.startTimeS,
        sampleIntervalS: g.sampleIntervalS,
        distancesM: distances.slice(first, first + tc),
        method: params.method,
        velocityMps: params.velocityMps,
      });
      const data = await transformTraceBlocks(ctx, g.data, g.traces.length, g.sampleCount, {
        local: (block, tc, first) => lineSourceTraces(args(block, tc, first)),
        remote: (pool, block, tc, first) => pool.run("lineSourceTraceBlock", args(block, tc, first), { transfer: [block.buffer as ArrayBuffer], signal: ctx.signal }),
      });
      // The transformation has no meaning at zero distance (its factor is zero): such traces carry
      // no signal now and are marked dead, so comparisons leave them out.
      const traces = g.traces.map((h, i) => (distances[i] === 0 && !h.dead ? { ...h, dead: true } : h));
      out.push({ ...g, traces, data });
      ctx.progress((gi + 1) / set.gathers.length, g.id);
    }
    const traces = out.reduce((s, g) => s + g.traces.length, 0);
    if (zeroDistance > 0) ctx.log.warn({ zeroDistance }, `${zeroDistance} traces at zero source-receiver distance became zero and are marked dead`);
    ctx.log.info({ traces, method: params.method }, `converted ${traces} traces to line-source (${params.method})`);
    return {
      outputs: { gathers: { kind: "gathers", gathers: out } },
      summary: { method: params.method, velocityMps: params.method === "single-velocity" ? params.velocityMps : null, traces, zeroDistance },
    };
  },
});

export default lineSourceStep;
