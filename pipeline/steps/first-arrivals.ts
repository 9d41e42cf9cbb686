/**
 * Step "first-arrivals": first-arrival picks per trace by an energy ratio (STA/LTA, Allen 1978)
 * or an information criterion (AIC, Maeda 1985), with a quality per pick and a consistency check
 * against offset (picks off the smooth offset-time trend are flagged). The picks feed the mute;
 * the offset-time table lets the processor check the geometry.
 */
import { z } from "zod";
import { defineStep, StepInputError, throwIfAborted } from "../step";
import type { Gather, GatherSet, PickSet } from "../types";
import { aicPicks, flagOffsetOutliers, staLtaPicks, type PickSearchWindow } from "../kernels/pickers";
import { applyPickEdits, type TracePickEdit } from "../kernels/pick-edits";
import { runTraceBlocks } from "../workers/trace-blocks";

/** One hand edit of a pick, as the control room saves it (see pipeline/kernels/pick-edits.ts for the semantics). */
const pickEditSchema = z.object({
  gather: z.string().min(1).describe('Id of the gather (shot record) the trace belongs to, e.g. "sp07"'),
  channel: z.number().int().min(1).describe("Channel number of the trace within its record (1-based)"),
  action: z
    .enum(["moved", "deleted", "added"])
    .describe('"moved": the pick of the trace goes to timeMs; "added": a pick at timeMs where the picker made none; "deleted": the trace keeps no pick'),
  timeMs: z.number().nullable().default(null).describe("New pick time, ms after the source (null for deleted)"),
});

/** A hand edit of a first-arrival pick (a `pickEdits` entry). */
export type FirstArrivalPickEdit = z.output<typeof pickEditSchema>;

export const firstArrivalsParams = z
  .object({
    /** @default "information-criterion" */
    method: z
      .enum(["energy-ratio", "information-criterion"])
      .default("information-criterion")
      .describe('"energy-ratio": STA/LTA (Allen 1978), pick at the ratio maximum after the first trigger; "information-criterion": AIC (Maeda 1985) around the energy-ratio pick (or over the whole search window when aicWindowMs is 0)'),
    /** @default "onset" */
    pickAt: z
      .enum(["onset", "ratio-peak"])
      .default("onset")
      .describe('Where an energy-ratio pick sits: "onset", where the energy first rises above the noise before the ratio maximum (for causal pulses such as a hammer blow), or "ratio-peak", at the ratio maximum'),
    /** @default 5 */
    shortWindowMs: z.number().positive().default(5).describe("Short (signal) window of the energy ratio, ms: about one period of the first arrival"),
    /** @default 50 */
    longWindowMs: z.number().positive().default(50).describe("Long (noise) window of the energy ratio, ms"),
    /** @default 4 */
    triggerRatio: z.number().gt(1).default(4).describe("Energy ratio (STA/LTA) that declares an arrival; traces that never reach it get no pick"),
    /** @default 20 */
    aicWindowMs: z.number().min(0).default(20).describe("Information criterion: half width of the window around the energy-ratio pick, ms; 0 evaluates it over the whole search window"),
    /** @default 0 */
    searchStartMs: z.number().default(0).describe("Earliest pick time, ms after the source"),
    /** @default null */
    searchEndMs: z.number().nullable().default(null).describe("Latest pick time, ms after the source (null: end of trace)"),
    /** @default null */
    searchFastestMps: z
      .number()
      .positive()
      .nullable()
      .default(null)
      .describe("Fastest velocity a first arrival can have, m/s: no pick before searchStartMs + |offset| / this (null: no such bound)"),
    /** @default null */
    searchSlowestMps: z
      .number()
      .positive()
      .nullable()
      .default(null)
      .describe("Slowest velocity a first arrival can have, m/s: no pick after searchSlowestInterceptMs + |offset| / this, which keeps slower surface waves out of the search (null: no such bound)"),
    /** @default 30 */
    searchSlowestInterceptMs: z.number().min(0).default(30).describe("Intercept time of the slowest-velocity bound, ms (room for the wavelet's rise)"),
    /** @default null */
    maxOffsetM: z
      .number()
      .positive()
      .nullable()
      .default(null)
      .describe("Largest |offset| picked, m: farther traces get no pick, e.g. where the first arrival sinks below the noise (null: every offset)"),
    /** @default 0.1 */
    minQuality: z.number().min(0).max(1).default(0.1).describe("Picks of lower quality (0 … 1: log10 of the energy ratio across the pick over 2) are dropped"),
    /** @default 3 */
    trendNeighbours: z.number().int().min(1).max(20).default(3).describe("Picked traces on each side used to fit the local offset-time trend"),
    /** @default 4 */
    trendToleranceMs: z.number().positive().default(4).describe("A pick farther than this from the local offset-time trend is flagged, ms"),
    /** @default [] */
    pickEdits: z
      .array(pickEditSchema)
      .default([])
      .describe(
        "Picks edited by hand (in the control room), applied after the automatic picker in list order (the last edit of a trace decides); hand picks have quality 1, are never flagged and are marked as hand picks",
      ),
  })
  .superRefine((p, ctx) => {
    if (p.longWindowMs < p.shortWindowMs) {
      ctx.addIssue({ code: "custom", path: ["longWindowMs"], message: `longWindowMs (${p.longWindowMs}) must not be shorter than shortWindowMs (${p.shortWindowMs})` });
    }
    if (p.searchFastestMps !== null && p.searchSlowestMps !== null && p.searchSlowestMps >= p.searchFastestMps) {
      ctx.addIssue({ code: "custom", path: ["searchSlowestMps"], message: `searchSlowestMps (${p.searchSlowestMps}) must be below searchFastestMps (${p.searchFastestMps})` });
    }
    if (p.searchEndMs !== null && p.searchEndMs <= p.searchStartMs) {
      ctx.addIssue({ code: "custom", path: ["searchEndMs"], message: `searchEndMs (${p.searchEndMs}) must be after searchStartMs (${p.searchStartMs})` });
    }
    p.pickEdits.forEach((e, i) => {
      if (e.action !== "deleted" && e.timeMs === null) {
        ctx.addIssue({ code: "custom", path: ["pickEdits", i, "timeMs"], message: `pickEdits[${i}] (${e.action}) needs a time, timeMs` });
      }
    });
  });

export type FirstArrivalsParams = z.output<typeof firstArrivalsParams>;

/**
 * The hand edits resolved to traces, per gather id. Refuses, as StepInputError naming the edit's
 * field (`pickEdits.3.channel`), an edit of a gather that is not there, of a channel the gather
 * does not hold (or holds on several traces), of a dead trace, or a time outside the record.
 */
export function resolvePickEdits(gathers: readonly Gather[], edits: readonly FirstArrivalPickEdit[]): Map<string, TracePickEdit[]> {
  const byId = new Map(gathers.map((g) => [g.id, g]));
  const out = new Map<string, TracePickEdit[]>();
  edits.forEach((e, i) => {
    const g = byId.get(e.gather);
    if (!g) {
      const ids = [...byId.keys()];
      throw new StepInputError(`pickEdits[${i}] names gather "${e.gather}", which is not among the gathers (${ids.slice(0, 8).join(", ")}${ids.length > 8 ? ", …" : ""})`, `pickEdits.${i}.gather`);
    }
    const rows = g.traces.flatMap((h, t) => (h.channel === e.channel ? [t] : []));
    if (rows.length === 0) {
      const channels = g.traces.map((h) => h.channel);
      throw new StepInputError(`pickEdits[${i}] names channel ${e.channel} of gather "${g.id}", which holds channels ${Math.min(...channels)} to ${Math.max(...channels)}`, `pickEdits.${i}.channel`);
    }
    if (rows.length > 1) throw new StepInputError(`pickEdits[${i}]: channel ${e.channel} occurs on ${rows.length} traces of gather "${g.id}" (several components?); edit a gather with one trace per channel`, `pickEdits.${i}.channel`);
    const trace = rows[0];
    if (g.traces[trace].dead) throw new StepInputError(`pickEdits[${i}] edits channel ${e.channel} of gather "${g.id}", a dead trace`, `pickEdits.${i}.channel`);
    let timeS = NaN;
    if (e.action !== "deleted") {
      const firstMs = g.startTimeS * 1000;
      const lastMs = (g.startTimeS + (g.sampleCount - 1) * g.sampleIntervalS) * 1000;
      // Half a microsecond of slack for the ms ↔ s round trip.
      if (e.timeMs === null || !(e.timeMs >= firstMs - 5e-4 && e.timeMs <= lastMs + 5e-4)) {
        throw new StepInputError(`pickEdits[${i}] puts the pick of channel ${e.channel} of gather "${g.id}" at ${e.timeMs} ms, outside the record (${firstMs.toFixed(3)} … ${lastMs.toFixed(3)} ms)`, `pickEdits.${i}.timeMs`);
      }
      timeS = e.timeMs / 1000;
    }
    const list = out.get(g.id) ?? [];
    list.push({ trace, action: e.action, timeS });
    out.set(g.id, list);
  });
  return out;
}

export const firstArrivalsStep = defineStep({
  id: "first-arrivals",
  version: 4,
  title: "First-arrival picking (STA/LTA, AIC)",
  description:
    "Picks first arrivals per trace by an energy ratio (STA/LTA on Allen's 1978 characteristic function) or by an information criterion " +
    "(AIC, Maeda 1985) refined around it. Each pick has a quality in [0, 1]; picks off the local offset-time trend (Theil–Sen line through " +
    "neighbouring picks) are flagged. Writes the picks and a report with the offset-time table for a geometry check.",
  reads: ["gathers"],
  writes: ["picks", "report"],
  params: firstArrivalsParams,
  async run(input, params, ctx) {
    const set = input.gathers as GatherSet;
    // Data-dependent checks for every gather before any work.
    const windows = set.gathers.map((g) => {
      const dt = g.sampleIntervalS;
      const toIndex = (ms: number) => Math.round((ms / 1000 - g.startTimeS) / dt);
      const endTimeMs = (g.startTimeS + (g.sampleCount - 1) * dt) * 1000;
      const searchStart = Math.max(0, toIndex(params.searchStartMs));
      const searchEnd = params.searchEndMs === null ? g.sampleCount : Math.min(g.sampleCount, toIndex(params.searchEndMs) + 1);
      if (searchStart >= searchEnd) {
        throw new StepInputError(`the search window ${params.searchStartMs} … ${params.searchEndMs ?? "end"} ms lies outside gather "${g.id}" (${(g.startTimeS * 1000).toFixed(3)} … ${endTimeMs.toFixed(3)} ms)`, "searchStartMs");
      }
      const shortSamples = Math.max(1, Math.round(params.shortWindowMs / 1000 / dt));
      const longSamples = Math.max(shortSamples, Math.round(params.longWindowMs / 1000 / dt));
      if (shortSamples + 2 > g.sampleCount) {
        throw new StepInputError(`shortWindowMs ${params.shortWindowMs} ms is longer than the traces of gather "${g.id}" (${g.sampleCount} samples of ${dt * 1000} ms)`, "shortWindowMs");
      }
      const w: PickSearchWindow = { searchStart, searchEnd, shortSamples, longSamples };
      if (params.searchFastestMps !== null || params.searchSlowestMps !== null || params.maxOffsetM !== null) {
        // Velocity-bounded search (common practice): between the lines of the fastest and the
        // slowest plausible first-arrival velocity through the source.
        const n = g.traces.length;
        const start = new Int32Array(n).fill(searchStart);
        const end = new Int32Array(n).fill(searchEnd);
        g.traces.forEach((h, t) => {
          const x = Math.abs(h.offset);
          if (params.searchFastestMps !== null) start[t] = Math.max(searchStart, toIndex(params.searchStartMs + (1000 * x) / params.searchFastestMps));
          if (params.searchSlowestMps !== null) {
            end[t] = Math.min(searchEnd, toIndex(params.searchSlowestInterceptMs + (1000 * x) / params.searchSlowestMps) + 1);
          }
          // An empty search window: no pick beyond the offset range.
          if (params.maxOffsetM !== null && x > params.maxOffsetM) end[t] = start[t];
        });
        w.perTrace = { start, end };
      }
      return w;
    });
    const editsByGather = resolvePickEdits(set.gathers, params.pickEdits);
    const result: PickSet = { kind: "picks", method: params.method, picks: [] };
    const table: Array<{ gatherId: string; traceIndex: number; channel: number; offsetM: number; timeS: number; quality: number; flagged: boolean; origin: "automatic" | "hand" }> = [];
    const perGather: Array<{ gatherId: string; traces: number; picked: number; flagged: number; dropped: number; handPicks: number; handDeleted: number }> = [];
    const hand = { moved: 0, added: 0, deleted: 0, superseded: 0 };
    for (let gi = 0; gi < set.gathers.length; gi++) {
      throwIfAborted(ctx.signal);
      const g = set.gathers[gi];
      const n = g.traces.length;
      const window = windows[gi];
      const aicHalfWidth = params.method === "information-criterion" ? Math.round(params.aicWindowMs / 1000 / g.sampleIntervalS) : 0;
      // Per-trace bounds follow the block of traces being picked.
      const blockWindow = (first: number, tc: number): PickSearchWindow =>
        window.perTrace
          ? { ...window, perTrace: { start: window.perTrace.start.slice(first, first + tc), end: window.perTrace.end.slice(first, first + tc) } }
          : window;
      const local = (block: Float32Array, tc: number, firstTrace: number) => {
        const window = blockWindow(firstTrace, tc);
        if (params.method === "energy-ratio") return staLtaPicks(block, tc, g.sampleCount, window, params.triggerRatio, params.pickAt);
        if (aicHalfWidth > 0) {
          const first = staLtaPicks(block, tc, g.sampleCount, window, params.triggerRatio, params.pickAt);
          return aicPicks(block, tc, g.sampleCount, window, { centres: first.index, halfWidth: aicHalfWidth });
        }
        return aicPicks(block, tc, g.sampleCount, window);
      };
      const parts = await runTraceBlocks(ctx, g.data, n, g.sampleCount, {
        local,
        remote: (pool, block, tc, firstTrace) =>
          pool.run(
            "pickTraceBlock",
            { data: block, traceCount: tc, sampleCount: g.sampleCount, method: params.method, window: blockWindow(firstTrace, tc), triggerRatio: params.triggerRatio, pickAt: params.pickAt, aicHalfWidth },
            { transfer: [block.buffer as ArrayBuffer], signal: ctx.signal },
          ),
      });
      const timesS = new Float64Array(n).fill(NaN);
      const quality = new Float64Array(n);
      let dropped = 0;
      for (const p of parts) {
        for (let k = 0; k < p.traceCount; k++) {
          const t = p.firstTrace + k;
          const idx = p.result.index[k];
          if (g.traces[t].dead || !(idx === idx)) continue;
          if (p.result.quality[k] < params.minQuality) {
            dropped++;
            continue;
          }
          timesS[t] = g.startTimeS + idx * g.sampleIntervalS;
          quality[t] = p.result.quality[k];
        }
      }
      // Hand edits after the automatic picker; the trend check sees the edited picks, and a hand
      // pick is the processor's word: quality 1, never flagged.
      const edited = applyPickEdits(timesS, editsByGather.get(g.id) ?? []);
      hand.moved += edited.moved;
      hand.added += edited.added;
      hand.deleted += edited.deleted;
      hand.superseded += edited.superseded;
      const offsets = g.traces.map((h) => h.offset);
      const flags = flagOffsetOutliers(offsets, edited.timesS, params.trendNeighbours, params.trendToleranceMs / 1000);
      let picked = 0;
      let flagged = 0;
      let handPicks = 0;
      let handDeleted = 0;
      for (let t = 0; t < n; t++) {
        const byHand = edited.hand[t] === 1;
        const time = edited.timesS[t];
        if (!(time === time)) {
          if (byHand) handDeleted++;
          continue;
        }
        const q = byHand ? 1 : quality[t];
        const isFlagged = !byHand && flags[t] === 1;
        const origin = byHand ? ("hand" as const) : ("automatic" as const);
        picked++;
        if (byHand) handPicks++;
        if (isFlagged) flagged++;
        result.picks.push({ gatherId: g.id, traceIndex: t, timeS: time, quality: q, flagged: isFlagged, origin });
        table.push({ gatherId: g.id, traceIndex: t, channel: g.traces[t].channel, offsetM: offsets[t], timeS: time, quality: q, flagged: isFlagged, origin });
      }
      perGather.push({ gatherId: g.id, traces: n, picked, flagged, dropped, handPicks, handDeleted });
      ctx.progress((gi + 1) / set.gathers.length, g.id);
    }
    const traces = perGather.reduce((s, p) => s + p.traces, 0);
    const picked = result.picks.length;
    const flagged = result.picks.filter((p) => p.flagged).length;
    const dropped = perGather.reduce((s, p) => s + p.dropped, 0);
    ctx.log.info({ traces, picked, flagged, dropped }, `picked ${picked} of ${traces} traces (${params.method}); ${flagged} picks flagged off the offset trend, ${dropped} dropped below quality ${params.minQuality}`);
    if (params.pickEdits.length > 0) {
      ctx.log.info(
        { handEdits: params.pickEdits.length, ...hand },
        `${params.pickEdits.length} hand edit(s): ${hand.moved} pick(s) moved, ${hand.added} added, ${hand.deleted} deleted${hand.superseded ? `, ${hand.superseded} edit(s) overruled by a later edit of the same trace` : ""}`,
      );
    }
    return {
      outputs: {
        picks: result,
        report: { kind: "json", role: "first-arrivals", data: { method: params.method, perGather, offsetTime: table } },
      },
      summary: { method: params.method, traces, picked, flagged, dropped, handEdits: params.pickEdits.length, handMoved: hand.moved, handAdded: hand.added, handDeleted: hand.deleted },
      series: [
        {
          name: "first-arrivals",
          xLabel: "offset (m)",
          yLabel: "first-arrival time (ms)",
          points: table.map((r) => ({ x: r.offsetM, y: r.timeS * 1000, group: r.origin === "hand" ? `${r.gatherId} (hand)` : r.flagged ? `${r.gatherId} (flagged)` : r.gatherId })),
        },
      ],
    };
  },
});

export default firstArrivalsStep;
