/**
 * Models a set of shots through an elastic model, one shot per worker task when a pool is given,
 * and returns synthetic gathers in the layout of the template gathers (same trace headers, sample
 * interval, sample count and start time), so synthetic and observed data line up trace by trace.
 */
import type { ElasticModel, Gather, SnapshotSet, TraceHeader } from "../../types";
import { FdSetupError } from "./errors";
import type { SourceWavelet } from "./wavelet";
import { checkSimulation, simulateShot, type ShotPositions, type SimulationOptions, type SimulationResult } from "./simulation";

/** A gather without samples: the geometry and sampling a synthetic gather is made for. */
export type GatherTemplate = Omit<Gather, "data">;

/** Simulation options shared by every shot (the output sampling comes from each template). */
export type ModelShotsOptions = Omit<SimulationOptions, "output" | "cancelFlag">;

/** The argument of one shot's task: {@link simulateShot}'s arguments as one plain object. */
export interface ModelShotTaskArg {
  model: ElasticModel;
  shot: ShotPositions;
  options: SimulationOptions;
}

/**
 * What {@link modelShots} needs of a worker pool: run the task "modelShotTask" (pipeline/workers/tasks.ts)
 * with one shot's argument. The step hands its pool in; kernels do not import the pool.
 */
export interface ShotRunner {
  run(task: "modelShotTask", arg: ModelShotTaskArg, options?: { signal?: AbortSignal; shotId?: string }): Promise<SimulationResult>;
}

/** Progress and cancellation for {@link modelShots}. */
export interface ModelShotsControl {
  /** Worker pool (or anything that runs the shot task): shots run in parallel, one task each. Without it they run here in turn. */
  pool?: ShotRunner;
  signal?: AbortSignal;
  /** Called after each finished shot with the count done and the total. */
  onShot?: (done: number, total: number, gatherId: string) => void;
  /** Gather id whose snapshots are kept (default: the first template). */
  snapshotGatherId?: string;
  /** Source wavelets by gather id, replacing `options.wavelet` for those shots. */
  wavelets?: Record<string, SourceWavelet>;
}

/** Result of {@link modelShots}. */
export interface ModelShotsResult {
  gathers: Gather[];
  snapshots?: SnapshotSet;
  /** Time step and steps per shot, grid points per shortest S wavelength. */
  dtS: number;
  steps: number;
  pointsPerWavelength: number;
}

/** Source and receiver positions of a template; all traces must share one source position. */
export function shotPositions(t: GatherTemplate): ShotPositions {
  if (t.traces.length === 0) throw new FdSetupError(`gather "${t.id}" has no traces to model.`, "gathers");
  const s = t.traces[0];
  for (const h of t.traces) {
    if (Math.abs(h.sourceX - s.sourceX) > 1e-6 || Math.abs(h.sourceZ - s.sourceZ) > 1e-6) {
      throw new FdSetupError(
        `gather "${t.id}" mixes source positions (${s.sourceX} m and ${h.sourceX} m); synthetic gathers need one source per gather.`,
        "gathers",
      );
    }
  }
  return {
    sourceX: s.sourceX,
    sourceZ: s.sourceZ,
    receiverX: Float64Array.from(t.traces, (h) => h.receiverX),
    receiverZ: Float64Array.from(t.traces, (h) => h.receiverZ),
  };
}

/**
 * Synthetic gathers for every template through `model`. Snapshots (if `options.snapshotTimesS`
 * is set) come from one shot only. Throws FdSetupError before any time step on unphysical cells,
 * an unstable dt or a too coarse grid; an AbortError when `control.signal` aborts.
 */
export async function modelShots(
  model: ElasticModel,
  templates: GatherTemplate[],
  options: ModelShotsOptions,
  control: ModelShotsControl = {},
): Promise<ModelShotsResult> {
  const snapId = control.snapshotGatherId ?? templates[0]?.id;
  const cancel = typeof SharedArrayBuffer !== "undefined" ? new Int32Array(new SharedArrayBuffer(4)) : undefined;
  const onAbort = () => cancel && Atomics.store(cancel, 0, 1);
  control.signal?.addEventListener("abort", onAbort, { once: true });
  let done = 0;
  const aborted = () => {
    if (control.signal?.aborted) {
      const err = new Error("cancelled");
      err.name = "AbortError";
      throw err;
    }
  };
  const component = options.component ?? (options.mode === "psv" ? "z" : "y");
  try {
    aborted();
    const runOne = async (t: GatherTemplate): Promise<SimulationResult> => {
      aborted();
      const opts: SimulationOptions = {
        ...options,
        wavelet: control.wavelets?.[t.id] ?? options.wavelet,
        snapshotTimesS: t.id === snapId ? options.snapshotTimesS : undefined,
        output: { intervalS: t.sampleIntervalS, count: t.sampleCount, startTimeS: t.startTimeS },
        cancelFlag: cancel,
      };
      const shot = shotPositions(t);
      // With the shared cancel flag a running shot stops itself within 64 steps and its worker stays
      // up; the signal goes to the pool only where there is no flag (it ends the worker thread).
      const res = control.pool
        ? await control.pool.run("modelShotTask", { model, shot, options: opts }, { shotId: t.id, signal: cancel ? undefined : control.signal }).catch((err: unknown) => {
            aborted();
            throw err;
          })
        : simulateShot(model, shot, opts);
      done++;
      control.onShot?.(done, templates.length, t.id);
      return res;
    };
    // Every shot's checks run here first, so bad input is refused before any shot starts.
    for (const t of templates) {
      checkSimulation(model, shotPositions(t), {
        ...options,
        wavelet: control.wavelets?.[t.id] ?? options.wavelet,
        output: { intervalS: t.sampleIntervalS, count: t.sampleCount, startTimeS: t.startTimeS },
      });
    }
    const results = await Promise.all(templates.map(runOne));
    const gathers: Gather[] = templates.map((t, k) => ({
      id: t.id,
      sampleIntervalS: t.sampleIntervalS,
      sampleCount: t.sampleCount,
      startTimeS: t.startTimeS,
      traces: t.traces.map((h): TraceHeader => ({ ...h, component, dead: false, stackCount: 1 })),
      data: results[k].traces,
    }));
    const si = templates.findIndex((t) => t.id === snapId);
    const snap = si >= 0 ? results[si].snapshots : undefined;
    return {
      gathers,
      snapshots: snap
        ? {
            kind: "snapshots",
            shotId: snapId!,
            component: `v${snap.component}`,
            nx: model.nx,
            nz: model.nz,
            spacingM: model.spacingM,
            originX: model.originX,
            originZ: model.originZ,
            timesS: snap.timesS,
            frames: snap.frames,
          }
        : undefined,
      dtS: results[0]?.dtS ?? 0,
      steps: results[0]?.steps ?? 0,
      pointsPerWavelength: results[0]?.pointsPerWavelength ?? 0,
    };
  } finally {
    control.signal?.removeEventListener("abort", onAbort);
  }
}
