/**
 * Speed of the waveform inversion on a grid the size of the demo's (line QM-1: 61 m × 14 m at
 * 0.25 m, 13 shots of 48 receivers, 0.3 s): one forward modelling of every shot, then a short
 * inversion (one stage, a few iterations) whose per-iteration wall time, forward and adjoint
 * solves and the ratio of one iteration to one forward modelling of all shots are reported. The
 * "observed" data are synthetics through a model with a slow body; no field data are needed.
 */
import { buildModel, paintShapes } from "../kernels/fd/model-grid";
import { modelShots, type GatherTemplate } from "../kernels/fd/model-shots";
import { memoryStepRecorder } from "../step-records";
import { waveformInversionParams, waveformInversionStep } from "../steps/waveform-inversion";
import type { TraceHeader } from "../types";
import type { WorkerPool } from "../workers/pool";
import { pino } from "pino";
import { setMaxListeners } from "node:events";

export interface InversionBench {
  grid: { nx: number; nz: number; spacingM: number };
  shots: number;
  samples: number;
  /** Wall seconds of one forward modelling of every shot: the median of one timing before and two after the inversion. */
  forwardAllShotsS: number;
  /** The three timings, in order. */
  forwardTimesS: number[];
  /** Per iteration: wall seconds, solves (forward + adjoint, all shots), objective evaluations. */
  iterations: Array<{ seconds: number; solves: number; evaluations: number }>;
  medianIterationS: number;
  /** Median iteration time over one forward modelling of all shots. */
  iterationOverForward: number;
  /** Mean solves per shot per iteration (forward and adjoint). */
  solvesPerShotPerIteration: number;
  peakResidentMB: number;
}

const median = (a: number[]) => {
  const s = [...a].sort((x, y) => x - y);
  return s.length % 2 ? s[(s.length - 1) / 2] : (s[s.length / 2 - 1] + s[s.length / 2]) / 2;
};

/** Runs the inversion bench on `pool` with `iterations` iterations (default 3). */
export async function benchInversion(pool: WorkerPool, iterations = 3): Promise<InversionBench> {
  let peak = process.memoryUsage().rss;
  const sampler = setInterval(() => (peak = Math.max(peak, process.memoryUsage().rss)), 50);
  try {
    const grid = { originX: -7, originZ: 0, spacingM: 0.25, nx: 245, nz: 57 };
    const layers = [
      { topM: 0, vp: 400, vs: 150, rho: 1750, vsGradient: 10 },
      { topM: 4, vp: 1600, vs: 190, rho: 1800, vsGradient: 10 },
    ];
    const start = buildModel(grid, layers);
    const truth = paintShapes(buildModel(grid, layers), [{ kind: "ellipse", centerXM: 27, centerZM: 0, radiusXM: 3, radiusZM: 3.5, vp: 400, vs: 110, rho: 1600 }]);
    const intervalS = 0.00025;
    const samples = 1201;
    const templates: GatherTemplate[] = Array.from({ length: 13 }, (_, s) => {
      const sx = -1 + 4 * s;
      return {
        id: `shot-${s + 1}`,
        sampleIntervalS: intervalS,
        sampleCount: samples,
        startTimeS: 0,
        traces: Array.from({ length: 48 }, (_, c): TraceHeader => ({
          sourceFile: `shot-${s + 1}`, channel: c + 1, sourcePoint: s + 1, blow: 0, sourceX: sx, sourceZ: 0,
          receiverX: c, receiverZ: 0, offset: c - sx, stackCount: 1, component: "z", dead: false,
        })),
      };
    });
    const simulation = { mode: "psv" as const, sourceKind: "force-z" as const, component: "z" as const, wavelet: { kind: "ricker" as const, peakHz: 30 }, pmlCells: 12 };
    const observed = await modelShots(truth, templates, simulation, { pool });
    // The machine's speed drifts: the forward modelling is timed once before and twice after the
    // inversion, and the median of the three is the yardstick of the iterations.
    const forwardTimes: number[] = [];
    const timeForward = async () => {
      const t0 = performance.now();
      await modelShots(start, templates, simulation, { pool });
      forwardTimes.push((performance.now() - t0) / 1000);
    };
    await timeForward();

    const recorder = memoryStepRecorder();
    const signal = new AbortController().signal;
    // One pool task per shot listens to the signal, as in the runner.
    setMaxListeners(0, signal);
    const ctx = {
      log: pino({ level: "silent" }),
      signal,
      progress: () => {},
      pool,
      ...recorder,
    };
    const params = waveformInversionParams.parse({
      waveletFrom: "ricker",
      rickerPeakHz: 30,
      pmlCells: 12,
      stages: [{ lowPassHz: 45, measure: "normalised-correlation", iterations, stopBelowRelativeChange: 0, reestimateWavelet: false, windowEndMs: 300 }],
    });
    await waveformInversionStep.run({ gathers: { kind: "gathers", gathers: observed.gathers }, model: start }, params, ctx);
    await timeForward();
    await timeForward();
    const forwardAllShotsS = median(forwardTimes);
    const rows = recorder.records.intermediates
      .filter((r) => r.kind === "model")
      .map((r) => {
        const m = r.meta as { wallS: number; forwardSolves: number; evaluations: number };
        return { seconds: m.wallS, solves: m.forwardSolves, evaluations: m.evaluations };
      });
    const medianIterationS = median(rows.map((r) => r.seconds));
    return {
      grid: { nx: grid.nx, nz: grid.nz, spacingM: grid.spacingM },
      shots: templates.length,
      samples,
      forwardAllShotsS,
      forwardTimesS: forwardTimes,
      iterations: rows,
      medianIterationS,
      iterationOverForward: medianIterationS / forwardAllShotsS,
      solvesPerShotPerIteration: rows.reduce((s, r) => s + r.solves, 0) / rows.length / templates.length,
      peakResidentMB: peak / 1e6,
    };
  } finally {
    clearInterval(sampler);
  }
}

/** The bench as lines for a terminal. */
export function formatInversionBench(b: InversionBench): string[] {
  return [
    `inversion (P-SV, ${b.grid.nx}×${b.grid.nz} cells at ${b.grid.spacingM} m, ${b.shots} shots × 48 receivers, ${b.samples} samples):`,
    `  one forward modelling of every shot   ${b.forwardAllShotsS.toFixed(1)} s  (median of ${b.forwardTimesS.map((t) => t.toFixed(1)).join(", ")} s: before and after the iterations)`,
    `  one iteration (median of ${b.iterations.length})          ${b.medianIterationS.toFixed(1)} s  (${b.iterationOverForward.toFixed(2)} × the forward modelling)`,
    `  solves per shot per iteration         ${b.solvesPerShotPerIteration.toFixed(2)} (forward and adjoint)`,
    `  peak resident memory                  ${b.peakResidentMB.toFixed(0)} MB`,
  ];
}
