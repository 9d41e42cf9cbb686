/**
 * Step "misfit": compares the observed gathers with the synthetic gathers trace by trace and
 * reports one number per trace, per gather and in total, by least squares (Tarantola 1984), the
 * global normalised cross-correlation objective (Choi & Alkhalifah 2012) or the envelope misfit
 * (Bozdağ, Trampert & Tromp 2011). Gathers pair up by id and traces by order; the step refuses
 * pairs whose geometry or sampling differ rather than guess (forward-model already writes its
 * synthetics on the observed sampling and trace layout).
 */
import { z } from "zod";
import { defineStep, StepInputError, throwIfAborted } from "../step";
import type { Gather, GatherSet } from "../types";
import { traceMisfits, type MisfitMeasure } from "../kernels/misfit";

export const misfitParams = z
  .object({
    /** @default "normalised-correlation" */
    measure: z
      .enum(["least-squares", "normalised-correlation", "envelope"])
      .default("normalised-correlation")
      .describe(
        'How traces are compared: "least-squares" ½Σ(syn − obs)² (Tarantola 1984); "normalised-correlation" 1 − syn·obs/(‖syn‖‖obs‖) per trace, 0 for a perfect fit, 2 for reversed polarity, blind to amplitude (Choi & Alkhalifah 2012); "envelope" ½Σ(Esyn − Eobs)² of the Hilbert envelopes (Bozdağ et al. 2011). Sums run over the samples in the window (unit: data unit squared for least squares and envelope, none for correlation)',
      ),
    /** @default true */
    normaliseTraces: z
      .boolean()
      .default(true)
      .describe("Least squares only: divide each trace by its L2 norm over the window before comparing, so the unknown source strength drops out (each trace's misfit then lies in [0, 2])"),
    /** Optional: default the start of the traces. */
    windowStartMs: z.number().optional().describe("Start of the compared time window, ms after the source instant; default the first sample"),
    /** Optional: default the end of the traces. */
    windowEndMs: z.number().optional().describe("End of the compared time window, ms after the source instant (inclusive); default the last sample"),
    /** @default true */
    skipDeadTraces: z.boolean().default(true).describe("Leave out traces marked dead in either the observed or the synthetic gather"),
    /** @default 0.01 */
    positionToleranceM: z
      .number()
      .min(0)
      .default(0.01)
      .describe("Largest difference, m, allowed between the observed and synthetic source and receiver positions of a trace"),
  })
  .superRefine((p, ctx) => {
    if (p.windowStartMs !== undefined && p.windowEndMs !== undefined && p.windowStartMs >= p.windowEndMs) {
      ctx.addIssue({ code: "custom", path: ["windowEndMs"], message: `windowEndMs (${p.windowEndMs} ms) must be after windowStartMs (${p.windowStartMs} ms)` });
    }
  });

export type MisfitParams = z.output<typeof misfitParams>;

/** One trace's misfit in the report. */
export interface TraceMisfitEntry {
  gatherId: string;
  /** Row of the trace in its gather, 0-based. */
  traceIndex: number;
  /** Signed offset receiverX − sourceX, m. */
  offset: number;
  value: number;
}

/** The "misfit" report (slot `report`, role "misfit"). */
export interface MisfitReport {
  measure: MisfitMeasure;
  /** How the numbers read, in words (convention and unit). */
  convention: string;
  /** Whether traces were normalised (least squares only; null for the other measures). */
  normaliseTraces: boolean | null;
  /** The requested window, s after the source instant (null ends: the trace ends). */
  window: { startS: number | null; endS: number | null };
  /** Sum of every compared trace's misfit. */
  total: number;
  /** Number of compared traces. */
  traces: number;
  perGather: Array<{ gatherId: string; sourceX: number; value: number; traces: number; firstSample: number; endSample: number }>;
  perTrace: TraceMisfitEntry[];
  /** Traces left out, and why. */
  skipped: Array<{ gatherId: string; traceIndex: number; reason: string }>;
  /** Compared traces with no energy in the window in one or both gathers (counted as uncorrelated by the normalised measures). */
  silentTraces: Array<{ gatherId: string; traceIndex: number; which: "observed" | "synthetic" | "both" }>;
  /** Synthetic gathers with no observed gather of their id (not compared). */
  unmatchedSynthetic: string[];
}

const CONVENTIONS: Record<MisfitMeasure, (normalise: boolean) => string> = {
  "least-squares": (n) =>
    n
      ? "½ Σ (syn/‖syn‖ − obs/‖obs‖)² per trace over the window samples (Tarantola 1984), traces normalised by their L2 norm: 0 for a perfect fit, at most 2; no unit"
      : "½ Σ (syn − obs)² per trace over the window samples (Tarantola 1984), not multiplied by the sample interval; unit: data unit squared",
  "normalised-correlation": () =>
    "Σ over traces of (1 − ĉ), ĉ = syn·obs / (‖syn‖ ‖obs‖) over the window (Choi & Alkhalifah 2012, shifted by the trace count): 0 for a perfect fit, 2 per polarity-reversed trace; no unit",
  envelope: () =>
    "½ Σ (Esyn − Eobs)² per trace over the window samples, E the envelope of the analytic signal (Bozdağ et al. 2011), computed on the whole trace; unit: data unit squared",
};

function describeSampling(g: Gather): string {
  return `${g.sampleCount} samples at ${g.sampleIntervalS * 1000} ms from ${g.startTimeS * 1000} ms`;
}

/** Checks that `syn` can be compared with `obs` trace by trace; throws StepInputError naming the gather and what differs. */
export function checkGatherPair(obs: Gather, syn: Gather, positionToleranceM: number): void {
  const where = `gather "${obs.id}"`;
  const refuse = (what: string): never => {
    throw new StepInputError(`${where}: the synthetic gather does not match the observed one: ${what}. Model the synthetics on the observed gathers (forward-model with geometryFrom "gathers") after the last step that changes sampling or traces.`, "synthetic");
  };
  if (Math.abs(syn.sampleIntervalS - obs.sampleIntervalS) > 1e-9 * obs.sampleIntervalS) {
    refuse(`sample interval ${syn.sampleIntervalS * 1000} ms (synthetic) against ${obs.sampleIntervalS * 1000} ms (observed)`);
  }
  if (syn.sampleCount !== obs.sampleCount) refuse(`${syn.sampleCount} samples per trace (synthetic) against ${obs.sampleCount} (observed)`);
  // Start times may carry rounding from ms in file headers; a thousandth of a sample is no shift.
  if (Math.abs(syn.startTimeS - obs.startTimeS) > 1e-3 * obs.sampleIntervalS) {
    refuse(`first sample at ${syn.startTimeS * 1000} ms (synthetic) against ${obs.startTimeS * 1000} ms (observed); sampling ${describeSampling(syn)} against ${describeSampling(obs)}`);
  }
  if (syn.traces.length !== obs.traces.length) refuse(`${syn.traces.length} traces (synthetic) against ${obs.traces.length} (observed)`);
  for (let t = 0; t < obs.traces.length; t++) {
    const o = obs.traces[t];
    const s = syn.traces[t];
    const at = `trace ${t} (channel ${o.channel})`;
    if (Math.abs(s.sourceX - o.sourceX) > positionToleranceM || Math.abs(s.sourceZ - o.sourceZ) > positionToleranceM) {
      refuse(`${at}: source at x ${s.sourceX} m, z ${s.sourceZ} m (synthetic) against x ${o.sourceX} m, z ${o.sourceZ} m (observed), tolerance ${positionToleranceM} m`);
    }
    if (Math.abs(s.receiverX - o.receiverX) > positionToleranceM || Math.abs(s.receiverZ - o.receiverZ) > positionToleranceM) {
      refuse(`${at}: receiver at x ${s.receiverX} m, z ${s.receiverZ} m (synthetic) against x ${o.receiverX} m, z ${o.receiverZ} m (observed), tolerance ${positionToleranceM} m`);
    }
    if (s.component !== o.component) {
      refuse(`${at}: component "${s.component}" (synthetic) against "${o.component}" (observed); set the recorded component in import-records or the modelled one in forward-model`);
    }
  }
}

/**
 * The sample range [first, end) of `g` inside the window [startS, endS] (null = trace end),
 * clamped to the trace; throws StepInputError when nothing of the trace lies inside.
 */
export function windowSamples(g: Gather, startS: number | null, endS: number | null): { first: number; end: number } {
  const n = g.sampleCount;
  const dt = g.sampleIntervalS;
  // A millionth of a sample absorbs rounding in ms → s conversions at the window edges.
  const first = startS === null ? 0 : Math.max(0, Math.ceil((startS - g.startTimeS) / dt - 1e-6));
  const end = endS === null ? n : Math.min(n, Math.floor((endS - g.startTimeS) / dt + 1e-6) + 1);
  if (end <= first) {
    const span = `${g.startTimeS * 1000} ms to ${(g.startTimeS + (n - 1) * dt) * 1000} ms`;
    const win = `${startS === null ? "trace start" : `${startS * 1000} ms`} to ${endS === null ? "trace end" : `${endS * 1000} ms`}`;
    throw new StepInputError(`gather "${g.id}": the window ${win} holds no sample of its traces (${span}).`, startS !== null ? "windowStartMs" : "windowEndMs");
  }
  return { first, end };
}

function hasEnergy(data: Float32Array, base: number, first: number, end: number): boolean {
  for (let i = base + first; i < base + end; i++) if (data[i] !== 0) return true;
  return false;
}

export const misfitStep = defineStep({
  id: "misfit",
  version: 1,
  title: "Misfit of synthetic against observed traces",
  description:
    "Compares the synthetic gathers with the observed gathers trace by trace (paired by gather id and trace order) in an optional time window: " +
    "least squares on raw or L2-normalised traces (Tarantola 1984), the global normalised cross-correlation objective, reported as Σ(1 − ĉ) so a perfect fit is 0 " +
    "(Choi & Alkhalifah 2012), or the envelope misfit of the analytic-signal envelopes (Bozdağ, Trampert & Tromp 2011). " +
    "Refuses gathers whose positions, sampling or trace counts differ, naming the gather and the difference. " +
    'Writes a report (role "misfit") with the total and the value of every gather and trace, and charts of misfit by offset and by source position.',
  reads: ["gathers", "synthetic"],
  writes: ["report"],
  params: misfitParams,
  async run(input, params, ctx) {
    const observed = (input.gathers as GatherSet).gathers;
    const synthetic = (input.synthetic as GatherSet).gathers;
    if (observed.length === 0) throw new StepInputError("There are no observed gathers to compare.", "gathers");
    const byId = new Map<string, Gather>();
    for (const g of synthetic) {
      if (byId.has(g.id)) throw new StepInputError(`The synthetic gathers hold the id "${g.id}" twice; each gather needs its own id.`, "synthetic");
      byId.set(g.id, g);
    }
    const observedIds = new Set(observed.map((g) => g.id));
    const startS = params.windowStartMs === undefined ? null : params.windowStartMs / 1000;
    const endS = params.windowEndMs === undefined ? null : params.windowEndMs / 1000;

    // Every check before any work.
    const pairs = observed.map((obs) => {
      const syn = byId.get(obs.id);
      if (!syn) {
        const have = synthetic.length > 0 ? `; synthetic gathers: ${synthetic.map((g) => `"${g.id}"`).slice(0, 12).join(", ")}${synthetic.length > 12 ? ", …" : ""}` : "; there are no synthetic gathers";
        throw new StepInputError(`gather "${obs.id}" has no synthetic gather of the same id${have}.`, "synthetic");
      }
      checkGatherPair(obs, syn, params.positionToleranceM);
      return { obs, syn, window: windowSamples(obs, startS, endS) };
    });
    const unmatchedSynthetic = synthetic.filter((g) => !observedIds.has(g.id)).map((g) => g.id);
    if (unmatchedSynthetic.length > 0) ctx.log.warn({ unmatchedSynthetic }, `${unmatchedSynthetic.length} synthetic gathers have no observed gather and are not compared`);

    const measure = params.measure;
    const normalisedMeasure = measure === "normalised-correlation" || (measure === "least-squares" && params.normaliseTraces);
    const perGather: MisfitReport["perGather"] = [];
    const perTrace: TraceMisfitEntry[] = [];
    const skipped: MisfitReport["skipped"] = [];
    const silentTraces: MisfitReport["silentTraces"] = [];
    let total = 0;
    for (let gi = 0; gi < pairs.length; gi++) {
      throwIfAborted(ctx.signal);
      const { obs, syn, window } = pairs[gi];
      const tc = obs.traces.length;
      const ns = obs.sampleCount;
      const include = new Uint8Array(tc).fill(1);
      if (params.skipDeadTraces) {
        for (let t = 0; t < tc; t++) {
          const o = obs.traces[t].dead;
          const s = syn.traces[t].dead;
          if (o || s) {
            include[t] = 0;
            skipped.push({ gatherId: obs.id, traceIndex: t, reason: o && s ? "dead in both" : o ? "dead (observed)" : "dead (synthetic)" });
          }
        }
      }
      const values = traceMisfits({
        synthetic: syn.data,
        observed: obs.data,
        traceCount: tc,
        sampleCount: ns,
        measure,
        normaliseTraces: params.normaliseTraces,
        firstSample: window.first,
        endSample: window.end,
        include,
      });
      let gatherValue = 0;
      let compared = 0;
      for (let t = 0; t < tc; t++) {
        if (include[t] === 0) continue;
        const value = values[t];
        if (!Number.isFinite(value)) {
          throw new StepInputError(`gather "${obs.id}", trace ${t} (channel ${obs.traces[t].channel}): the observed or synthetic samples hold NaN or infinite values; the misfit is undefined.`, "gathers");
        }
        perTrace.push({ gatherId: obs.id, traceIndex: t, offset: obs.traces[t].offset, value });
        gatherValue += value;
        compared++;
        const eo = hasEnergy(obs.data, t * ns, window.first, window.end);
        const es = hasEnergy(syn.data, t * ns, window.first, window.end);
        if (!eo || !es) silentTraces.push({ gatherId: obs.id, traceIndex: t, which: !eo && !es ? "both" : !eo ? "observed" : "synthetic" });
      }
      perGather.push({ gatherId: obs.id, sourceX: obs.traces[0]?.sourceX ?? 0, value: gatherValue, traces: compared, firstSample: window.first, endSample: window.end });
      total += gatherValue;
      ctx.progress((gi + 1) / pairs.length, obs.id);
    }
    if (silentTraces.length > 0 && normalisedMeasure) {
      ctx.log.warn({ silentTraces: silentTraces.length }, `${silentTraces.length} compared traces have no energy in the window; each counts as uncorrelated`);
    }

    const report: MisfitReport = {
      measure,
      convention: CONVENTIONS[measure](params.normaliseTraces),
      normaliseTraces: measure === "least-squares" ? params.normaliseTraces : null,
      window: { startS, endS },
      total,
      traces: perTrace.length,
      perGather,
      perTrace,
      skipped,
      silentTraces,
      unmatchedSynthetic,
    };
    ctx.log.info({ measure, total, traces: perTrace.length, gathers: perGather.length }, `${measure} misfit ${total.toPrecision(6)} over ${perTrace.length} traces in ${perGather.length} gathers`);
    return {
      outputs: { report: { kind: "json", role: "misfit", data: report } },
      summary: {
        measure,
        total,
        traces: perTrace.length,
        gathers: perGather.length,
        skippedTraces: skipped.length,
        silentTraces: silentTraces.length,
        unmatchedSynthetic: unmatchedSynthetic.length,
      },
      series: [
        {
          name: "misfit-by-offset",
          xLabel: "offset (m)",
          yLabel: `trace misfit (${measure})`,
          points: perTrace.map((p) => ({ x: p.offset, y: p.value, group: p.gatherId })),
        },
        {
          name: "misfit-by-gather",
          xLabel: "source position x (m)",
          yLabel: `gather misfit (${measure})`,
          // One line across the profile (a group per gather would make one-point lines).
          points: perGather.map((g) => ({ x: g.sourceX, y: g.value })),
        },
      ],
    };
  },
});

export default misfitStep;
