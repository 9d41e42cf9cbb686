/**
 * Step "gain": per-trace normalisation (maximum or RMS), automatic gain control over a sliding
 * window, or time-power gain t^p. The kind and its settings (and, for normalisation, each trace's
 * factor) are written to a report with role "gain", so a later comparison can undo or repeat it.
 */
import { z } from "zod";
import { defineStep, throwIfAborted } from "../step";
import type { Gather, GatherSet } from "../types";
import { agcTraces, normaliseTraces, timePowerTraces } from "../kernels/gain";
import { runTraceBlocks } from "../workers/trace-blocks";

export const gainParams = z
  .object({
    /** @default "trace-rms" */
    kind: z
      .enum(["trace-max", "trace-rms", "agc", "time-power"])
      .default("trace-rms")
      .describe('"trace-max": each trace scaled to peak 1; "trace-rms": to RMS 1; "agc": automatic gain control (divide by the RMS in a sliding window); "time-power": multiply by t^timePower (t in s after the source)'),
    /** @default 100 */
    agcWindowMs: z.number().positive().default(100).describe("AGC window length, ms (centred on each sample; used by kind agc)"),
    /** @default 1 */
    timePower: z.number().min(0).max(4).default(1).describe("Exponent p of the time-power gain t^p (used by kind time-power); 1 undoes body-wave spreading in a uniform medium, 2 is a common stronger choice"),
  })
  .superRefine((p, ctx) => {
    if (p.kind === "agc" && p.agcWindowMs < 1) {
      ctx.addIssue({ code: "custom", path: ["agcWindowMs"], message: `agcWindowMs must be at least 1 ms, got ${p.agcWindowMs}` });
    }
  });

export type GainParams = z.output<typeof gainParams>;

/** What the "gain" report records: enough to repeat the gain, and to undo a normalisation. */
export interface GainRecord {
  kind: GainParams["kind"];
  agcWindowMs: number | null;
  timePower: number | null;
  /** For trace-max / trace-rms: the factor each trace was multiplied by (divide to undo). */
  traceFactors: Array<{ gatherId: string; factors: number[] }> | null;
}

export const gainStep = defineStep({
  id: "gain",
  version: 1,
  title: "Gain and normalisation",
  description:
    "Per-trace normalisation to peak 1 or RMS 1, automatic gain control (each sample divided by the RMS of a centred window), " +
    "or time-power gain t^p. Writes a report (role \"gain\") with the kind, its settings and the per-trace factors of a normalisation, " +
    "so a comparison step can undo or repeat the same gain.",
  reads: ["gathers"],
  writes: ["gathers", "report"],
  params: gainParams,
  async run(input, params, ctx) {
    const set = input.gathers as GatherSet;
    const out: Gather[] = [];
    const factors: Array<{ gatherId: string; factors: number[] }> = [];
    let traces = 0;
    for (let gi = 0; gi < set.gathers.length; gi++) {
      throwIfAborted(ctx.signal);
      const g = set.gathers[gi];
      const ns = g.sampleCount;
      const agcWindowSamples = Math.max(1, Math.round(params.agcWindowMs / 1000 / g.sampleIntervalS));
      const local = (block: Float32Array, tc: number) => {
        if (params.kind === "trace-max" || params.kind === "trace-rms") {
          const r = normaliseTraces(block, tc, ns, params.kind === "trace-max" ? "max" : "rms");
          return { data: r.data, scales: r.scales as Float64Array | null };
        }
        const data =
          params.kind === "agc"
            ? agcTraces(block, tc, ns, agcWindowSamples)
            : timePowerTraces(block, tc, ns, g.startTimeS, g.sampleIntervalS, params.timePower);
        return { data, scales: null as Float64Array | null };
      };
      const parts = await runTraceBlocks(ctx, g.data, g.traces.length, ns, {
        local,
        remote: (pool, block, tc) =>
          pool.run(
            "gainTraceBlock",
            { data: block, traceCount: tc, sampleCount: ns, kind: params.kind, agcWindowSamples, startTimeS: g.startTimeS, sampleIntervalS: g.sampleIntervalS, timePower: params.timePower },
            { transfer: [block.buffer as ArrayBuffer], signal: ctx.signal },
          ),
      });
      const data = parts.length === 1 ? parts[0].result.data : new Float32Array(g.traces.length * ns);
      const scale: number[] = [];
      for (const p of parts) {
        if (parts.length > 1) data.set(p.result.data, p.firstTrace * ns);
        if (p.result.scales) scale.push(...Array.from(p.result.scales));
      }
      if (params.kind === "trace-max" || params.kind === "trace-rms") factors.push({ gatherId: g.id, factors: scale });
      out.push({ ...g, data });
      traces += g.traces.length;
      ctx.progress((gi + 1) / set.gathers.length, g.id);
    }
    const normalised = params.kind === "trace-max" || params.kind === "trace-rms";
    const record: GainRecord = {
      kind: params.kind,
      agcWindowMs: params.kind === "agc" ? params.agcWindowMs : null,
      timePower: params.kind === "time-power" ? params.timePower : null,
      traceFactors: normalised ? factors : null,
    };
    ctx.log.info({ kind: params.kind, traces }, `applied ${params.kind} gain to ${traces} traces in ${out.length} gathers`);
    return {
      outputs: { gathers: { kind: "gathers", gathers: out }, report: { kind: "json", role: "gain", data: record } },
      // Only the setting the kind uses: the AGC window for agc, the power for time-power.
      summary: {
        kind: params.kind,
        ...(params.kind === "agc" ? { agcWindowMs: params.agcWindowMs } : {}),
        ...(params.kind === "time-power" ? { timePower: params.timePower } : {}),
        gathers: out.length,
        traces,
      },
    };
  },
});

export default gainStep;
