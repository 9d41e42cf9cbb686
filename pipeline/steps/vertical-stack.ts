/**
 * Step "vertical-stack": combines the repeated blows of each source point into one gather, trace
 * by trace, by a mean, a median or a weighted stack that resists a bad blow (kernels in
 * ../kernels/stack.ts), and reports how much the stack lowered the noise.
 *
 * Grouping: gathers are grouped by source point (set by the geometry step). Blows of one source
 * point must share sample count, sample interval, start time and channel layout (channel
 * numbers, components, receiver positions within the tolerance); otherwise the step stops with
 * an error naming the gathers. Blows whose source positions lie further apart than the
 * tolerance are stacked anyway but warned about and flagged in the report: the geometry check
 * is where such a mistake is fixed.
 *
 * Dead traces (flagged dead, or all samples zero) of single blows are left out of their
 * channel's stack; a channel dead in every blow stays dead. The stacked trace's stackCount is
 * the sum of the stackCounts of the blows that took part (a channel dead in every blow keeps the
 * sum over all blows).
 *
 * Noise reduction estimate, per source point ("snrGain" = noise RMS of a typical single blow /
 * noise RMS of the stack; for a fixed signal this is the gain in signal-to-noise ratio):
 * - "pre-trigger-window" (preferred): when the records start before the source instant with at
 *   least `noiseWindowMinSamples` samples before t = 0, those samples hold noise only. The
 *   typical blow's noise power is the median over blows of its mean square there, the stack's is
 *   its mean square in the same window. Works for every method.
 * - "between-blows": otherwise, for the mean and weighted stacks, each blow's noise variance is
 *   estimated from the spread of the blows around their mean (Grubbs 1948, see
 *   blowNoiseVariances) and the stack's as the variance of a weighted sum of independent
 *   variables, sum w_i^2 v_i; the typical blow is the median of the v_i. The median stack is not
 *   a weighted sum, so this estimator does not apply to it ("none").
 * For N blows with independent noise of equal variance the expected gain is sqrt(N) for the mean
 * (variance of a mean), about sqrt(N) for the weighted stack, and about sqrt(2N/pi) for the
 * median (asymptotic relative efficiency 2/pi, Kendall & Stuart); the report gives that figure
 * beside the measured one.
 */
import { z } from "zod";
import {
  blowNoiseVariances,
  linearStackNoiseVariance,
  meanStack,
  meanStackWeights,
  medianStack,
  weightedStack,
  windowMeanSquare,
  type StackInput,
} from "../kernels/stack";
import { defineStep, StepInputError, throwIfAborted, type StepSeries } from "../step";
import type { Gather, GatherSet, JsonDocument, TraceHeader } from "../types";

export const verticalStackParams = z.object({
  /** @default "weighted" */
  method: z
    .enum(["mean", "median", "weighted"])
    .default("weighted")
    .describe(
      'How blows are combined, per channel and sample: "mean"; "median" (resists a wild blow, noise falls by about sqrt(2N/pi) instead of sqrt(N)); "weighted" (inverse-variance weights from each blow\'s residual against the median trace: a noisy or spiky blow gets little weight)',
    ),
  /** @default "source-point" */
  groupBy: z
    .enum(["source-point", "source-position"])
    .default("source-point")
    .describe(
      'Which blows belong together: "source-point" (the source point number the geometry step assigned) or "source-position" (blows whose source x lie within positionToleranceM of each other, whatever number the log gave them; use with geometry positionsFrom: file-headers when the field log mislabelled blows)',
    ),
  /** @default 0.25 */
  positionToleranceM: z
    .number()
    .min(0)
    .default(0.25)
    .describe("Largest spread of the source positions of one source point's blows, and of one channel's receiver positions, that is accepted without a warning (source) or an error (receiver), m"),
  /** @default 0.5 */
  downWeightedBelow: z
    .number()
    .gt(0)
    .lt(1)
    .default(0.5)
    .describe("A blow is reported as down-weighted when its weight, averaged over channels, is below this fraction of an equal share (1/N)"),
  /** @default 16 */
  noiseWindowMinSamples: z
    .number()
    .int()
    .min(2)
    .default(16)
    .describe("Fewest samples before the source instant (t < 0) needed to measure noise there; with fewer, noise is estimated from the spread between blows, samples"),
});

export type VerticalStackParams = z.output<typeof verticalStackParams>;

/** How one blow took part in its source point's stack. */
export interface StackBlowReport {
  gatherId: string;
  blow: number;
  /** Source position of the blow, m. */
  sourceXM: number;
  /**
   * Weight relative to an equal share (weight * live blows of the channel), averaged over the
   * channels where the blow is live; 1 for the mean stack, null for the median stack.
   */
  relativeWeight: number | null;
  /** Channels where the blow's relative weight is below downWeightedBelow. */
  downWeightedChannels: number;
  /** Channels of this blow left out as dead. */
  deadChannels: number;
}

/** Noise-reduction estimate of one source point's stack. */
export interface StackNoiseReport {
  estimator: "pre-trigger-window" | "between-blows" | "single-blow" | "none";
  /** Samples per trace in the pre-trigger window (pre-trigger estimator only). */
  windowSamples: number | null;
  /** Noise RMS of a typical single blow (median over blows), amplitude units. */
  singleBlowNoiseRms: number | null;
  /** Noise RMS of the stack, amplitude units. */
  stackNoiseRms: number | null;
  /** singleBlowNoiseRms / stackNoiseRms. */
  snrGain: number | null;
  /** Gain expected for independent noise of equal variance in every blow (see the module doc). */
  independentNoiseGain: number;
  /** Why there is no estimate, when there is none. */
  note?: string;
}

/** One source point in the "stack" report. */
export interface StackSourcePointReport {
  gatherId: string;
  sourcePoint: number;
  /** Source position given to the stack (median of the blows), m. */
  sourceXM: number;
  /** Largest minus smallest source position of the blows, m. */
  sourceXSpreadM: number;
  /** True when sourceXSpreadM exceeds positionToleranceM. */
  positionWarning: boolean;
  blowCount: number;
  blows: StackBlowReport[];
  /** Gather ids of the blows whose relativeWeight is below downWeightedBelow. */
  downWeighted: string[];
  /** Channels (1-based) dead in every blow, still dead in the stack. */
  deadChannels: number[];
  noise: StackNoiseReport;
}

/** Data of the "stack" report. */
export interface StackReport {
  method: VerticalStackParams["method"];
  downWeightedBelow: number;
  sourcePoints: StackSourcePointReport[];
}

/** Median of a non-empty list (mean of the two middle values for an even count). */
function median(values: number[]): number {
  const v = [...values].sort((a, b) => a - b);
  const h = v.length >> 1;
  return v.length % 2 === 1 ? v[h] : 0.5 * (v[h - 1] + v[h]);
}

function finiteMedian(values: number[]): number {
  const f = values.filter(Number.isFinite);
  return f.length > 0 ? median(f) : NaN;
}

/** Output gather id of a source point, e.g. "sp07". */
export function stackGatherId(sourcePoint: number): string {
  return `sp${String(sourcePoint).padStart(2, "0")}`;
}

/** Checks that the blows of one source point can be stacked sample by sample; throws StepInputError. */
function checkCompatible(blows: Gather[], sourcePoint: number, tolM: number): void {
  const ref = blows[0];
  const what = (g: Gather) => `gathers "${ref.id}" and "${g.id}" of source point ${sourcePoint}`;
  for (const g of blows.slice(1)) {
    if (g.sampleCount !== ref.sampleCount) {
      throw new StepInputError(`${what(g)} differ in sample count (${ref.sampleCount} and ${g.sampleCount}); blows must match to be stacked`, "gathers");
    }
    if (Math.abs(g.sampleIntervalS - ref.sampleIntervalS) > 1e-6 * ref.sampleIntervalS) {
      throw new StepInputError(
        `${what(g)} differ in sample interval (${ref.sampleIntervalS * 1000} ms and ${g.sampleIntervalS * 1000} ms); blows must match to be stacked`,
        "gathers",
      );
    }
    // Start times within a thousandth of a sample count as equal (float rounding of header values).
    if (Math.abs(g.startTimeS - ref.startTimeS) > 1e-3 * ref.sampleIntervalS) {
      throw new StepInputError(
        `${what(g)} differ in start time (${ref.startTimeS * 1000} ms and ${g.startTimeS * 1000} ms); blows must match to be stacked`,
        "gathers",
      );
    }
    if (g.traces.length !== ref.traces.length) {
      throw new StepInputError(`${what(g)} differ in trace count (${ref.traces.length} and ${g.traces.length}); blows must match to be stacked`, "gathers");
    }
    for (let t = 0; t < ref.traces.length; t++) {
      const a = ref.traces[t];
      const b = g.traces[t];
      if (a.channel !== b.channel || a.component !== b.component) {
        throw new StepInputError(
          `${what(g)} differ at trace ${t + 1}: channel ${a.channel} (${a.component}) against channel ${b.channel} (${b.component}); blows must share the channel layout`,
          "gathers",
        );
      }
      const bothFinite = Number.isFinite(a.receiverX) && Number.isFinite(b.receiverX);
      if ((bothFinite && Math.abs(a.receiverX - b.receiverX) > tolM) || Number.isFinite(a.receiverX) !== Number.isFinite(b.receiverX)) {
        throw new StepInputError(
          `${what(g)} place channel ${a.channel} at different receiver positions (${a.receiverX} m and ${b.receiverX} m, tolerance ${tolM} m); blows must share the spread`,
          "gathers",
        );
      }
    }
  }
}

/** True when every sample of trace `t` is zero. */
function allZero(data: Float32Array, t: number, sampleCount: number): boolean {
  const base = t * sampleCount;
  for (let s = 0; s < sampleCount; s++) if (data[base + s] !== 0) return false;
  return true;
}

export const verticalStackStep = defineStep({
  id: "vertical-stack",
  version: 1,
  title: "Vertical stack of repeated blows",
  description:
    "Combines the blows of each source point into one gather per source point (id like sp07), channel by channel: mean, median, or a weighted stack with inverse-variance weights from each blow's residual against the median trace (Bevington & Robinson, weighted mean), so that a noisy or spiky blow counts little. Dead channels stay dead. Reports blows per source point, down-weighted blows, and the measured noise reduction (from the pre-trigger window, or from the spread between blows after Grubbs 1948) beside the sqrt(N) expected for independent noise.",
  reads: ["gathers"],
  writes: ["gathers", "report"],
  params: verticalStackParams,
  async run(input, params, ctx) {
    const gathers = (input.gathers as GatherSet).gathers;
    const tol = params.positionToleranceM;

    const groups = new Map<number, Gather[]>();
    for (const g of gathers) {
      if (g.traces.length === 0) throw new StepInputError(`gather "${g.id}" has no traces`, "gathers");
      const sp = g.traces[0].sourcePoint;
      const other = g.traces.find((t) => t.sourcePoint !== sp);
      if (other) {
        throw new StepInputError(
          `gather "${g.id}" holds traces of source points ${sp} and ${other.sourcePoint}; run the geometry step first`,
          "gathers",
        );
      }
      if (params.groupBy === "source-point") {
        const list = groups.get(sp) ?? [];
        list.push(g);
        groups.set(sp, list);
      }
    }
    if (params.groupBy === "source-position") {
      // Cluster by source x: sorted positions split where the gap exceeds the tolerance. Each
      // cluster takes the source point number most of its blows carry.
      const byX = [...gathers].sort((a, b) => a.traces[0].sourceX - b.traces[0].sourceX);
      if (byX.some((g) => !Number.isFinite(g.traces[0].sourceX))) {
        throw new StepInputError("some gathers have no source position; run the geometry step first", "groupBy");
      }
      let cluster: Gather[] = [];
      const flush = () => {
        if (cluster.length === 0) return;
        const counts = new Map<number, number>();
        for (const g of cluster) counts.set(g.traces[0].sourcePoint, (counts.get(g.traces[0].sourcePoint) ?? 0) + 1);
        const sp = [...counts.entries()].sort((a, b) => b[1] - a[1] || a[0] - b[0])[0][0];
        const relabelled = cluster.filter((g) => g.traces[0].sourcePoint !== sp);
        if (relabelled.length > 0) {
          ctx.log.warn(
            { sourcePoint: sp, gathers: relabelled.map((g) => g.id) },
            `${relabelled.map((g) => g.id).join(", ")} stacked with source point ${sp} by position (the log gave another number)`,
          );
        }
        const list = groups.get(sp) ?? [];
        list.push(...cluster.map((g) => (g.traces[0].sourcePoint === sp ? g : { ...g, traces: g.traces.map((t) => ({ ...t, sourcePoint: sp })) })));
        groups.set(sp, list);
        cluster = [];
      };
      for (const g of byX) {
        if (cluster.length > 0 && g.traces[0].sourceX - cluster[cluster.length - 1].traces[0].sourceX > Math.max(tol, 1e-9)) flush();
        cluster.push(g);
      }
      flush();
    }
    const ordered = [...groups.entries()].sort((a, b) => a[0] - b[0]);

    const out: Gather[] = [];
    const reports: StackSourcePointReport[] = [];
    const gainSeries: StepSeries = { name: "stack-snr-gain", xLabel: "source x (m)", yLabel: "noise reduction (single blow / stack)", points: [] };

    for (let gi = 0; gi < ordered.length; gi++) {
      throwIfAborted(ctx.signal);
      const [sourcePoint, unsorted] = ordered[gi];
      const blows = [...unsorted].sort((a, b) => a.traces[0].blow - b.traces[0].blow);
      checkCompatible(blows, sourcePoint, tol);
      const blowNumbers = blows.map((b) => b.traces[0].blow);
      if (new Set(blowNumbers).size !== blowNumbers.length) {
        ctx.log.warn({ sourcePoint, gathers: blows.map((b) => b.id), blows: blowNumbers }, `blow numbers repeat at source point ${sourcePoint}`);
      }

      const ref = blows[0];
      const N = blows.length;
      const traceCount = ref.traces.length;
      const sampleCount = ref.sampleCount;
      const live = new Uint8Array(N * traceCount);
      for (let b = 0; b < N; b++) {
        for (let t = 0; t < traceCount; t++) {
          live[b * traceCount + t] = blows[b].traces[t].dead || allZero(blows[b].data, t, sampleCount) ? 0 : 1;
        }
      }
      const stackInput: StackInput = { records: blows.map((b) => b.data), traceCount, sampleCount, live };

      let stack: Float32Array;
      let weights: Float64Array | null = null;
      if (params.method === "mean") {
        stack = meanStack(stackInput);
        weights = meanStackWeights(stackInput);
      } else if (params.method === "median") {
        stack = medianStack(stackInput);
      } else {
        const r = weightedStack(stackInput);
        stack = r.stack;
        weights = r.weights;
      }

      // Per-channel liveness of the stack, and traces live in every blow (for the noise estimate).
      const liveCount = new Int32Array(traceCount);
      const allLive = new Uint8Array(traceCount);
      for (let t = 0; t < traceCount; t++) {
        for (let b = 0; b < N; b++) liveCount[t] += live[b * traceCount + t];
        allLive[t] = liveCount[t] === N ? 1 : 0;
      }

      const files = [...new Set(blows.map((b) => b.traces[0].sourceFile))].join("+");
      const traces: TraceHeader[] = ref.traces.map((h, t) => {
        const sourceX = finiteMedian(blows.map((b) => b.traces[t].sourceX));
        const receiverX = finiteMedian(blows.map((b) => b.traces[t].receiverX));
        let stackCount = 0;
        for (let b = 0; b < N; b++) if (liveCount[t] === 0 || live[b * traceCount + t]) stackCount += blows[b].traces[t].stackCount;
        return {
          ...h,
          sourceFile: files,
          blow: 0,
          sourceX,
          sourceZ: finiteMedian(blows.map((b) => b.traces[t].sourceZ)),
          receiverX,
          receiverZ: finiteMedian(blows.map((b) => b.traces[t].receiverZ)),
          offset: receiverX - sourceX,
          stackCount,
          dead: liveCount[t] === 0,
        };
      });
      const gatherId = stackGatherId(sourcePoint);
      out.push({ id: gatherId, sampleIntervalS: ref.sampleIntervalS, sampleCount, startTimeS: ref.startTimeS, traces, data: stack });

      // Positions of the blows.
      const blowX = blows.map((b) => finiteMedian(b.traces.map((t) => t.sourceX)));
      const finiteX = blowX.filter(Number.isFinite);
      const spread = finiteX.length > 0 ? Math.max(...finiteX) - Math.min(...finiteX) : 0;
      const positionWarning = spread > tol;
      if (positionWarning) {
        ctx.log.warn(
          { sourcePoint, gathers: blows.map((b) => b.id), sourceXM: blowX },
          `blows of source point ${sourcePoint} lie ${spread.toFixed(2)} m apart (tolerance ${tol} m); stacked anyway, check the geometry`,
        );
      }

      // Blow weights relative to an equal share.
      const blowReports: StackBlowReport[] = blows.map((b, bi) => {
        let sum = 0;
        let count = 0;
        let down = 0;
        let dead = 0;
        for (let t = 0; t < traceCount; t++) {
          if (!live[bi * traceCount + t]) {
            dead++;
            continue;
          }
          if (weights) {
            const rel = weights[bi * traceCount + t] * liveCount[t];
            sum += rel;
            count++;
            if (rel < params.downWeightedBelow) down++;
          }
        }
        return {
          gatherId: b.id,
          blow: b.traces[0].blow,
          sourceXM: blowX[bi],
          relativeWeight: weights ? (count > 0 ? sum / count : 0) : null,
          downWeightedChannels: down,
          deadChannels: dead,
        };
      });
      const downWeighted = blowReports.filter((r) => r.relativeWeight !== null && r.relativeWeight < params.downWeightedBelow).map((r) => r.gatherId);
      if (downWeighted.length > 0) ctx.log.info({ sourcePoint, downWeighted }, `source point ${sourcePoint}: ${downWeighted.length} blow(s) down-weighted`);

      const noise = estimateNoise(stackInput, stack, weights, allLive, ref, params);
      if (noise.snrGain !== null) gainSeries.points.push({ x: finiteMedian(blowX), y: noise.snrGain, group: "measured" });
      gainSeries.points.push({ x: finiteMedian(blowX), y: noise.independentNoiseGain, group: "independent noise" });

      reports.push({
        gatherId,
        sourcePoint,
        sourceXM: finiteMedian(blowX),
        sourceXSpreadM: spread,
        positionWarning,
        blowCount: N,
        blows: blowReports,
        downWeighted,
        deadChannels: traces.filter((t) => t.dead).map((t) => t.channel),
        noise,
      });
      ctx.progress((gi + 1) / ordered.length);
    }

    const gains = reports.map((r) => r.noise.snrGain).filter((g): g is number => g !== null);
    const downWeightedBlows = reports.reduce((n, r) => n + r.downWeighted.length, 0);
    ctx.log.info(
      { sourcePoints: out.length, blows: gathers.length, method: params.method, downWeightedBlows, medianSnrGain: gains.length ? median(gains) : null },
      `stacked ${gathers.length} blows into ${out.length} source points (${params.method})`,
    );
    const data: StackReport = { method: params.method, downWeightedBelow: params.downWeightedBelow, sourcePoints: reports };
    const report: JsonDocument = { kind: "json", role: "stack", data };
    return {
      outputs: { gathers: { kind: "gathers", gathers: out }, report },
      summary: stackSummary(params, out.length, gathers.length, reports, gains),
      series: [gainSeries],
    };
  },
});

/**
 * The step's summary, saying only what applies to its settings: down-weighted blows only for the
 * weighted stack (mean and median weigh every blow alike), position warnings only when blows are
 * grouped by source point number (grouping by position puts blows together because they lie
 * together) or when some were raised all the same.
 */
export function stackSummary(
  params: Pick<VerticalStackParams, "method" | "groupBy">,
  sourcePoints: number,
  blows: number,
  reports: Array<Pick<StackSourcePointReport, "positionWarning" | "downWeighted">>,
  gains: number[],
): Record<string, unknown> {
  const positionWarnings = reports.filter((r) => r.positionWarning).length;
  return {
    sourcePoints,
    blows,
    method: params.method,
    groupBy: params.groupBy,
    ...(params.method === "weighted" ? { downWeightedBlows: reports.reduce((n, r) => n + r.downWeighted.length, 0) } : {}),
    ...(params.groupBy === "source-point" || positionWarnings > 0 ? { positionWarnings } : {}),
    medianSnrGain: gains.length ? median(gains) : null,
  };
}

/** Noise-reduction estimate of one stack (see the module doc for the two estimators). */
function estimateNoise(
  input: StackInput,
  stack: Float32Array,
  weights: Float64Array | null,
  allLive: Uint8Array,
  ref: Gather,
  params: VerticalStackParams,
): StackNoiseReport {
  const N = input.records.length;
  const { traceCount, sampleCount } = input;
  const independentNoiseGain = params.method === "median" && N > 2 ? Math.sqrt((2 * N) / Math.PI) : Math.sqrt(N);
  const none = (estimator: StackNoiseReport["estimator"], note: string): StackNoiseReport => ({
    estimator,
    windowSamples: null,
    singleBlowNoiseRms: null,
    stackNoiseRms: null,
    snrGain: estimator === "single-blow" ? 1 : null,
    independentNoiseGain,
    note,
  });
  if (N === 1) return none("single-blow", "one blow: nothing stacked");
  if (!allLive.some((v) => v === 1)) return none("none", "no channel is live in every blow");

  // Samples strictly before the source instant: t_k = startTimeS + k dt < 0.
  const preTrigger = ref.startTimeS < 0 ? Math.min(sampleCount, Math.ceil(-ref.startTimeS / ref.sampleIntervalS - 1e-9)) : 0;
  let single: number;
  let stacked: number;
  let estimator: StackNoiseReport["estimator"];
  if (preTrigger >= params.noiseWindowMinSamples) {
    estimator = "pre-trigger-window";
    const powers = input.records.map((r) => windowMeanSquare(r, traceCount, sampleCount, 0, preTrigger, allLive));
    single = median(powers);
    stacked = windowMeanSquare(stack, traceCount, sampleCount, 0, preTrigger, allLive);
  } else if (weights) {
    estimator = "between-blows";
    const v = blowNoiseVariances(input);
    single = median([...v]);
    stacked = linearStackNoiseVariance(weights, v, traceCount, allLive);
  } else {
    return none(
      "none",
      `fewer than ${params.noiseWindowMinSamples} samples before the source instant, and the median stack is not a weighted sum: no between-blow estimate`,
    );
  }
  const gain = stacked > 0 && Number.isFinite(single) ? Math.sqrt(single / stacked) : null;
  return {
    estimator,
    windowSamples: estimator === "pre-trigger-window" ? preTrigger : null,
    singleBlowNoiseRms: Number.isFinite(single) ? Math.sqrt(single) : null,
    stackNoiseRms: Number.isFinite(stacked) ? Math.sqrt(stacked) : null,
    snrGain: gain,
    independentNoiseGain,
    ...(gain === null ? { note: "the stack has no measurable noise" } : {}),
  };
}

export default verticalStackStep;
