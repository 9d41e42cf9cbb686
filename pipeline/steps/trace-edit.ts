/**
 * Step "trace-edit": kill traces (set to zero and mark dead) or reverse their polarity, chosen by
 * source point (shot) and channel.
 */
import { z } from "zod";
import { defineStep, throwIfAborted } from "../step";
import type { Gather, GatherSet } from "../types";
import { editTraces, TRACE_KEEP, TRACE_KILL, TRACE_REVERSE } from "../kernels/trace-edit";

const traceList = z
  .array(
    z.object({
      sourcePoint: z.number().int().describe("Source point (shot) number, as in the geometry table"),
      channels: z.array(z.number().int().positive()).min(1).describe("Channel numbers, 1-based"),
    }),
  )
  .default([]);

export const traceEditParams = z
  .object({
    /** @default [] */
    kill: traceList.describe("Traces to kill (zeroed and marked dead): list of { sourcePoint, channels: [..] }"),
    /** @default [] */
    reversePolarity: traceList.describe("Traces whose polarity to reverse: list of { sourcePoint, channels: [..] }"),
  })
  .superRefine((p, ctx) => {
    const killed = new Set(p.kill.flatMap((e) => e.channels.map((c) => `${e.sourcePoint}:${c}`)));
    p.reversePolarity.forEach((e, i) => {
      for (const c of e.channels) {
        if (killed.has(`${e.sourcePoint}:${c}`)) {
          ctx.addIssue({ code: "custom", path: ["reversePolarity", i, "channels"], message: `source point ${e.sourcePoint} channel ${c} is both killed and reversed` });
        }
      }
    });
  });

export type TraceEditParams = z.output<typeof traceEditParams>;

export const traceEditStep = defineStep({
  id: "trace-edit",
  version: 1,
  title: "Trace edits (kill, reverse polarity)",
  description:
    "Kills traces (samples set to zero, header marked dead) or reverses their polarity, chosen by source point and channel. " +
    "List entries that match no trace are reported in the log and summary.",
  reads: ["gathers"],
  writes: ["gathers"],
  params: traceEditParams,
  async run(input, params, ctx) {
    const set = input.gathers as GatherSet;
    const key = (sp: number, ch: number) => `${sp}:${ch}`;
    const kill = new Set(params.kill.flatMap((e) => e.channels.map((c) => key(e.sourcePoint, c))));
    const reverse = new Set(params.reversePolarity.flatMap((e) => e.channels.map((c) => key(e.sourcePoint, c))));
    const matched = new Set<string>();
    let killed = 0;
    let reversed = 0;
    const out: Gather[] = [];
    for (let gi = 0; gi < set.gathers.length; gi++) {
      throwIfAborted(ctx.signal);
      const g = set.gathers[gi];
      const actions = new Uint8Array(g.traces.length);
      g.traces.forEach((h, t) => {
        const k = key(h.sourcePoint, h.channel);
        if (kill.has(k)) {
          actions[t] = TRACE_KILL;
          matched.add(k);
        } else if (reverse.has(k)) {
          actions[t] = TRACE_REVERSE;
          matched.add(k);
        } else actions[t] = TRACE_KEEP;
      });
      if (!actions.some((a) => a !== TRACE_KEEP)) {
        out.push(g);
        continue;
      }
      const data = editTraces(g.data, g.traces.length, g.sampleCount, actions);
      const traces = g.traces.map((h, t) => (actions[t] === TRACE_KILL ? { ...h, dead: true } : h));
      killed += actions.filter((a) => a === TRACE_KILL).length;
      reversed += actions.filter((a) => a === TRACE_REVERSE).length;
      out.push({ ...g, traces, data });
      ctx.progress((gi + 1) / set.gathers.length, g.id);
    }
    const unmatched = [...kill, ...reverse].filter((k) => !matched.has(k));
    if (unmatched.length > 0) ctx.log.warn({ unmatched }, `${unmatched.length} listed traces (source point:channel) match no trace: ${unmatched.join(", ")}`);
    ctx.log.info({ killed, reversed }, `killed ${killed} traces, reversed ${reversed}`);
    return {
      outputs: { gathers: { kind: "gathers", gathers: out } },
      summary: { killed, reversed, unmatched },
    };
  },
});

export default traceEditStep;
