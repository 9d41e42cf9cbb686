/**
 * Task functions run inside pool workers. Each takes one plain argument object
 * (typed arrays allowed, their buffers transferred) and returns a plain object.
 * Keep them thin: call the pure kernels in pipeline/kernels/.
 *
 * Register a new task by exporting it here; `pool.run("name", arg)` then finds it.
 */
import { Piscina } from "piscina";

/** Sums a Float32Array; used to check the pool and transfers. */
export function sumSamples(arg: { samples: Float32Array }): { sum: number; length: number } {
  let s = 0;
  for (let i = 0; i < arg.samples.length; i++) s += arg.samples[i];
  return { sum: s, length: arg.samples.length };
}

/** Returns a scaled copy, moving the result buffer back to the caller. */
export function scaleSamples(arg: { samples: Float32Array; factor: number }) {
  const out = new Float32Array(arg.samples.length);
  for (let i = 0; i < out.length; i++) out[i] = arg.samples[i] * arg.factor;
  return Piscina.move(out);
}

// ---- Signal-processing steps: each task runs one kernel on a block of whole traces ----

import { filterTraces, type FilterTracesArgs } from "../kernels/filter";

/** Frequency filter on a block `[trace][sample]`; the result buffer moves back to the caller. */
export function filterTraceBlock(arg: FilterTracesArgs): Float32Array {
  return Piscina.move(filterTraces(arg)) as unknown as Float32Array;
}

// ---- Elastic finite-difference solver: one shot per task, and the solver bench ----

import { simulateShot, timeKernelSteps, type ShotPositions, type SimulationOptions } from "../kernels/fd/simulation";
import type { ElasticModel } from "../types";

/** Models one shot (pipeline/kernels/fd/simulation.ts); traces `[receiver][sample]` come back. */
export function modelShotTask(arg: { model: ElasticModel; shot: ShotPositions; options: SimulationOptions }) {
  return simulateShot(arg.model, arg.shot, arg.options);
}

/** Times solver steps on a homogeneous model in this worker (the solver bench). */
export function solverBenchTask(arg: Parameters<typeof timeKernelSteps>[0]) {
  return timeKernelSteps(arg);
}
