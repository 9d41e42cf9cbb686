/**
 * How close the first-arrival picks of line QM-1 come to the true onsets of the invented
 * Quillmoor scenario, and how many picks the trend check flags. Only the demo can do this (a real
 * survey has no true model).
 *
 *   npx tsx examples/quillmoor/assess-picks.ts [run id]   (default: the latest run of a Quillmoor
 *                                                          pipeline whose first-arrivals step finished)
 *
 * The true onset of a trace is the first-arrival travel time of P through the hidden true model
 * (true-ground.ts: Vp 400 m/s above the water table at 4 m, 1,600 m/s below, 250 m/s in the
 * hollow) from the source to the receiver, by the factored fast-sweeping eikonal solver on the true
 * model's own grid. The hammer's force pulse starts at the trigger (causal, onset at t = 0), so the
 * first motion of a trace starts at that travel time.
 */
import path from "node:path";
import { pathToFileURL } from "node:url";
import type { GatherSet, PickSet } from "../../pipeline/types";
import { eikonalTimes, interpolateNodes, type TravelTimeGrid } from "../../pipeline/kernels/traveltime/eikonal";
import { quillmoorTrueModel } from "./true-ground";

/** Summary of picks against true onsets. Errors are pick − true onset, ms. */
export interface PickAssessment {
  /** Picks compared (every pick, flagged or not). */
  picks: number;
  /** Traces that could have been picked (live traces of the gathers). */
  liveTraces: number;
  /** Median of |error| over all picks, ms. */
  medianAbsErrorMs: number;
  /** 90th percentile of |error| over all picks, ms. */
  p90AbsErrorMs: number;
  /** Median signed error over all picks, ms (negative: picks early). */
  medianErrorMs: number;
  /** Median and 90th percentile of |error| over the unflagged picks, ms. */
  unflaggedMedianAbsErrorMs: number;
  unflaggedP90AbsErrorMs: number;
  /** Share of picks flagged off the offset-time trend, 0 … 1. */
  flaggedFraction: number;
  /** Share of picks more than 5 ms from the true onset, 0 … 1. */
  wrongFraction: number;
}

/** q-quantile of the values (linear interpolation between order statistics), NaN when empty. */
export function quantile(values: number[], q: number): number {
  if (values.length === 0) return Number.NaN;
  const s = [...values].sort((a, b) => a - b);
  const pos = q * (s.length - 1);
  const lo = Math.floor(pos);
  const hi = Math.min(s.length - 1, lo + 1);
  return s[lo] + (pos - lo) * (s[hi] - s[lo]);
}

/**
 * True first-arrival times (s) through the true model for each (source x, receiver x) pair on the
 * surface, keyed by source x: one eikonal solution per distinct source position.
 */
export function trueOnsets(pairs: Array<{ sourceX: number; receiverX: number }>): Float64Array {
  const model = quillmoorTrueModel();
  const grid: TravelTimeGrid = { nx: model.nx, nz: model.nz, spacingM: model.spacingM };
  const slowness = new Float64Array(model.nx * model.nz);
  for (let k = 0; k < slowness.length; k++) slowness[k] = 1 / model.vp[k];
  const bySource = new Map<number, Float64Array>();
  const out = new Float64Array(pairs.length);
  pairs.forEach((p, i) => {
    let times = bySource.get(p.sourceX);
    if (!times) {
      times = eikonalTimes(slowness, grid, p.sourceX - model.originX, 0).times;
      bySource.set(p.sourceX, times);
    }
    out[i] = interpolateNodes(times, grid, p.receiverX - model.originX, 0);
  });
  return out;
}

/** Compares picks with the true onsets of their traces. */
export function assessPicks(picks: PickSet, gathers: GatherSet): PickAssessment {
  const byId = new Map(gathers.gathers.map((g) => [g.id, g]));
  const pairs = picks.picks.map((p) => {
    const h = byId.get(p.gatherId)?.traces[p.traceIndex];
    if (!h) throw new RangeError(`pick on ${p.gatherId} trace ${p.traceIndex} has no trace in the gathers`);
    return { sourceX: h.sourceX, receiverX: h.receiverX };
  });
  const truth = trueOnsets(pairs);
  const all: number[] = [];
  const signed: number[] = [];
  const unflagged: number[] = [];
  let flagged = 0;
  picks.picks.forEach((p, i) => {
    const e = (p.timeS - truth[i]) * 1000;
    signed.push(e);
    all.push(Math.abs(e));
    if (p.flagged) flagged++;
    else unflagged.push(Math.abs(e));
  });
  const live = gathers.gathers.reduce((s, g) => s + g.traces.filter((h) => !h.dead).length, 0);
  return {
    picks: all.length,
    liveTraces: live,
    medianAbsErrorMs: quantile(all, 0.5),
    p90AbsErrorMs: quantile(all, 0.9),
    medianErrorMs: quantile(signed, 0.5),
    unflaggedMedianAbsErrorMs: quantile(unflagged, 0.5),
    unflaggedP90AbsErrorMs: quantile(unflagged, 0.9),
    flaggedFraction: all.length ? flagged / all.length : Number.NaN,
    wrongFraction: all.length ? all.filter((e) => e > 5).length / all.length : Number.NaN,
  };
}

/** The assessment as lines for a terminal. */
export function describePickAssessment(a: PickAssessment): string[] {
  const f = (v: number, d = 2) => (Number.isFinite(v) ? v.toFixed(d) : "none");
  return [
    `picks              ${a.picks} of ${a.liveTraces} live traces`,
    `pick error         median ${f(a.medianAbsErrorMs)} ms, 90th percentile ${f(a.p90AbsErrorMs)} ms, median signed ${f(a.medianErrorMs)} ms  (pick − true onset)`,
    `unflagged picks    median ${f(a.unflaggedMedianAbsErrorMs)} ms, 90th percentile ${f(a.unflaggedP90AbsErrorMs)} ms`,
    `flagged            ${f(100 * a.flaggedFraction, 1)} % of the picks off the offset-time trend`,
    `wrong by > 5 ms    ${f(100 * a.wrongFraction, 1)} % of the picks`,
  ];
}

if (process.argv[1] && import.meta.url === pathToFileURL(path.resolve(process.argv[1])).href) {
  const { getDb, closeDb } = await import("../../db/client");
  const { getRun, listRuns } = await import("../../db/queries/runs");
  const { readArtifactSync } = await import("../../pipeline/artifact-store");
  const db = getDb();
  const arg = process.argv[2];
  const candidates = arg
    ? [Number(arg)]
    : listRuns(db, { pageSize: 50 })
        .rows.filter((r) => r.pipelineName.startsWith("quillmoor-qm1"))
        .map((r) => r.id);
  let found: { runId: number; picks: string; gathers: string } | null = null;
  for (const id of candidates) {
    const r = getRun(db, id);
    const s = r?.steps.find((x) => x.stepId === "first-arrivals" && x.status === "succeeded");
    if (r && s?.outputs.picks && s.inputs.gathers) {
      found = { runId: r.id, picks: s.outputs.picks, gathers: s.inputs.gathers };
      break;
    }
  }
  closeDb();
  if (!found) {
    process.stderr.write(`assess-picks: ${arg ? `run ${arg} has` : "there is"} no finished first-arrivals step to assess\n`);
    process.exit(2);
  }
  const a = assessPicks(readArtifactSync(found.picks) as PickSet, readArtifactSync(found.gathers) as GatherSet);
  process.stdout.write(`Run ${found.runId}: first-arrival picks against the true onsets (invented demo)\n`);
  for (const line of describePickAssessment(a)) process.stdout.write(`  ${line}\n`);
}
