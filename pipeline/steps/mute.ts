/**
 * Step "mute": top mute before a straight line (intercept + |offset| / velocity) or before the
 * first-arrival picks less a margin, bottom mute after a slower line, surgical windows, all with
 * cosine tapers on the muted side. The lines are written as the "mutes" artifact for drawing.
 */
import { z } from "zod";
import { defineStep, StepInputError, throwIfAborted } from "../step";
import type { Gather, GatherSet, MuteSet, PickSet } from "../types";
import { applyMutes, linearMuteLine, type MuteLines } from "../kernels/mute";
import { runTraceBlocks } from "../workers/trace-blocks";

const windowSpec = z
  .object({
    minOffsetM: z.number().min(0).default(0).describe("Smallest |offset| the window applies to, m"),
    maxOffsetM: z.number().min(0).default(1e9).describe("Largest |offset| the window applies to, m"),
    startMs: z.number().describe("Window start, ms after the source"),
    endMs: z.number().describe("Window end, ms after the source"),
    gatherIds: z.array(z.string()).default([]).describe("Gathers it applies to (empty: all)"),
  })
  .superRefine((w, ctx) => {
    if (!(w.endMs > w.startMs)) ctx.addIssue({ code: "custom", path: ["endMs"], message: `endMs (${w.endMs}) must be after startMs (${w.startMs})` });
    if (w.maxOffsetM < w.minOffsetM) ctx.addIssue({ code: "custom", path: ["maxOffsetM"], message: `maxOffsetM (${w.maxOffsetM}) must not be below minOffsetM (${w.minOffsetM})` });
  });

export const muteParams = z
  .object({
    /** @default "line" */
    topMute: z
      .enum(["none", "line", "picks"])
      .default("line")
      .describe('Top mute: "line" zeroes before topInterceptMs + |offset| / topVelocityMps; "picks" zeroes before each first-arrival pick less pickMarginMs; "none"'),
    /** @default 0 */
    topInterceptMs: z.number().default(0).describe("Intercept time of the top-mute line, ms"),
    /** @default 2500 */
    topVelocityMps: z.number().positive().default(2500).describe("Velocity of the top-mute line, m/s (faster than the first arrivals, so the line runs ahead of them)"),
    /** @default 5 */
    pickMarginMs: z.number().min(0).default(5).describe("With topMute picks: how far before each pick the mute ends, ms"),
    /** @default false */
    useFlaggedPicks: z.boolean().default(false).describe("With topMute picks: also trust picks flagged as off the offset trend (otherwise they are replaced by interpolation between neighbours)"),
    /** @default false */
    bottomMute: z.boolean().default(false).describe("Zero everything after bottomInterceptMs + |offset| / bottomVelocityMps"),
    /** @default 50 */
    bottomInterceptMs: z.number().default(50).describe("Intercept time of the bottom-mute line, ms"),
    /** @default 100 */
    bottomVelocityMps: z.number().positive().default(100).describe("Velocity of the bottom-mute line, m/s (slower than the waves to keep)"),
    /** @default [] */
    windows: z.array(windowSpec).default([]).describe("Surgical windows to zero: list of { minOffsetM, maxOffsetM, startMs, endMs, gatherIds }"),
    /** @default 10 */
    taperMs: z.number().min(0).default(10).describe("Cosine taper length on the muted side of every line, ms"),
  })
  .superRefine((p, ctx) => {
    if (p.topMute === "none" && !p.bottomMute && p.windows.length === 0) {
      ctx.addIssue({ code: "custom", path: ["topMute"], message: 'nothing to mute: choose topMute "line" or "picks", bottomMute true, or give windows' });
    }
    if (p.topMute === "line" && p.bottomMute && p.bottomVelocityMps >= p.topVelocityMps && p.bottomInterceptMs <= p.topInterceptMs) {
      ctx.addIssue({ code: "custom", path: ["bottomVelocityMps"], message: `the bottom-mute line (${p.bottomVelocityMps} m/s from ${p.bottomInterceptMs} ms) lies before the top-mute line everywhere: everything would be muted` });
    }
  });

export type MuteParams = z.output<typeof muteParams>;

/**
 * Top-mute times from picks: pick − margin per trace; traces without a usable pick get a time
 * interpolated linearly in |offset| between the nearest picked traces on the same side of the
 * source (the nearest one's beyond the last); NaN when the side has no pick.
 */
export function topLineFromPicks(g: Gather, picks: PickSet, marginS: number, useFlagged: boolean): { timesS: Float32Array; interpolated: number } {
  const n = g.traces.length;
  const own = new Float64Array(n).fill(NaN);
  for (const p of picks.picks) {
    if (p.gatherId === g.id && p.traceIndex >= 0 && p.traceIndex < n && (useFlagged || !p.flagged)) own[p.traceIndex] = p.timeS - marginS;
  }
  const timesS = new Float32Array(n).fill(NaN);
  let interpolated = 0;
  for (const side of [-1, 1]) {
    const members = g.traces.map((h, i) => i).filter((i) => (side < 0 ? g.traces[i].offset < 0 : g.traces[i].offset >= 0));
    const known = members.filter((i) => own[i] === own[i]).sort((a, b) => Math.abs(g.traces[a].offset) - Math.abs(g.traces[b].offset));
    if (known.length === 0) continue;
    for (const i of members) {
      if (own[i] === own[i]) {
        timesS[i] = own[i];
        continue;
      }
      const x = Math.abs(g.traces[i].offset);
      let lo = -1;
      let hi = -1;
      for (const k of known) {
        const xk = Math.abs(g.traces[k].offset);
        if (xk <= x) lo = k;
        else if (hi < 0) hi = k;
      }
      if (lo >= 0 && hi >= 0) {
        const x0 = Math.abs(g.traces[lo].offset);
        const x1 = Math.abs(g.traces[hi].offset);
        timesS[i] = x1 > x0 ? own[lo] + ((own[hi] - own[lo]) * (x - x0)) / (x1 - x0) : own[lo];
      } else timesS[i] = own[lo >= 0 ? lo : hi];
      interpolated++;
    }
  }
  return { timesS, interpolated };
}

export const muteStep = defineStep({
  id: "mute",
  version: 1,
  title: "Mute (top, bottom, surgical windows)",
  description:
    "Zeroes samples before a top-mute line (intercept + |offset| / velocity, or the first-arrival picks less a margin), " +
    "after a slower bottom-mute line, and inside surgical windows, with cosine tapers on the muted side. " +
    "The lines are kept as the mutes artifact so the control room can draw them over the traces.",
  reads: ["gathers"],
  optionalReads: ["picks"],
  writes: ["gathers", "mutes"],
  params: muteParams,
  async run(input, params, ctx) {
    const set = input.gathers as GatherSet;
    const picks = input.picks as PickSet | undefined;
    if (params.topMute === "picks" && !picks) {
      throw new StepInputError('topMute "picks" needs first-arrival picks: run the first-arrivals step before mute, or use topMute "line"', "topMute");
    }
    const taperS = params.taperMs / 1000;
    const mutes: MuteSet = { kind: "mutes", lines: [] };
    const out: Gather[] = [];
    let mutedTraces = 0;
    let interpolatedPicks = 0;
    const gathersWithoutPicks: string[] = [];
    for (let gi = 0; gi < set.gathers.length; gi++) {
      throwIfAborted(ctx.signal);
      const g = set.gathers[gi];
      const n = g.traces.length;
      const offsets = g.traces.map((h) => h.offset);
      const lines: MuteLines = {};
      if (params.topMute === "line") lines.top = linearMuteLine(offsets, params.topInterceptMs / 1000, params.topVelocityMps);
      else if (params.topMute === "picks" && picks) {
        const r = topLineFromPicks(g, picks, params.pickMarginMs / 1000, params.useFlaggedPicks);
        interpolatedPicks += r.interpolated;
        if (r.timesS.some((t) => t === t)) lines.top = r.timesS;
        else gathersWithoutPicks.push(g.id);
      }
      if (params.bottomMute) lines.bottom = linearMuteLine(offsets, params.bottomInterceptMs / 1000, params.bottomVelocityMps);
      const windows = params.windows.filter((w) => w.gatherIds.length === 0 || w.gatherIds.includes(g.id));
      if (windows.length > 0) {
        lines.windows = windows.map((w) => {
          const start = new Float32Array(n).fill(NaN);
          const end = new Float32Array(n).fill(NaN);
          offsets.forEach((o, t) => {
            const a = Math.abs(o);
            if (a >= w.minOffsetM && a <= w.maxOffsetM) {
              start[t] = w.startMs / 1000;
              end[t] = w.endMs / 1000;
            }
          });
          return { start, end };
        });
      }
      const ns = g.sampleCount;
      const sliceLines = (first: number, count: number): MuteLines => ({
        top: lines.top?.slice(first, first + count),
        bottom: lines.bottom?.slice(first, first + count),
        windows: lines.windows?.map((w) => ({ start: w.start.slice(first, first + count), end: w.end.slice(first, first + count) })),
      });
      const parts = await runTraceBlocks(ctx, g.data, n, ns, {
        local: (block, tc, first) => applyMutes(block, tc, ns, g.startTimeS, g.sampleIntervalS, sliceLines(first, tc), taperS),
        remote: (pool, block, tc, first) =>
          pool.run(
            "muteTraceBlock",
            { data: block, traceCount: tc, sampleCount: ns, startTimeS: g.startTimeS, sampleIntervalS: g.sampleIntervalS, lines: sliceLines(first, tc), taperS },
            { transfer: [block.buffer as ArrayBuffer], signal: ctx.signal },
          ),
      });
      const data = parts.length === 1 ? parts[0].result.data : new Float32Array(n * ns);
      for (const p of parts) {
        if (parts.length > 1) data.set(p.result.data, p.firstTrace * ns);
        mutedTraces += p.result.mutedTraces;
      }
      out.push({ ...g, data });
      if (lines.top) mutes.lines.push({ gatherId: g.id, role: "top", timesS: lines.top, taperS });
      if (lines.bottom) mutes.lines.push({ gatherId: g.id, role: "bottom", timesS: lines.bottom, taperS });
      for (const w of lines.windows ?? []) {
        mutes.lines.push({ gatherId: g.id, role: "window-start", timesS: w.start, taperS });
        mutes.lines.push({ gatherId: g.id, role: "window-end", timesS: w.end, taperS });
      }
      ctx.progress((gi + 1) / set.gathers.length, g.id);
    }
    const traces = set.gathers.reduce((s, g) => s + g.traces.length, 0);
    if (gathersWithoutPicks.length > 0) {
      ctx.log.warn({ gathersWithoutPicks }, `no usable picks in ${gathersWithoutPicks.length} gathers; their top mute was skipped: ${gathersWithoutPicks.join(", ")}`);
    }
    ctx.log.info({ mutedTraces, traces, interpolatedPicks }, `muted ${mutedTraces} of ${traces} traces`);
    return {
      outputs: { gathers: { kind: "gathers", gathers: out }, mutes },
      summary: { mutedTraces, traces, topMute: params.topMute, bottomMute: params.bottomMute, windows: params.windows.length, interpolatedPicks, gathersWithoutPicks },
    };
  },
});

export default muteStep;
