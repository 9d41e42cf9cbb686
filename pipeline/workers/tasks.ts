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

/**
 * Marks `flags[mine]`, then waits (Atomics.wait, at most `limitMs`) until `flags[peer]` is marked
 * by another task; used to check that the pool runs tasks at the same time. Returns whether the
 * peer was seen (false only when the two tasks did not run at once).
 */
export function meetPeer(arg: { flags: Int32Array; mine: number; peer: number; limitMs: number }): { met: boolean } {
  Atomics.store(arg.flags, arg.mine, 1);
  Atomics.notify(arg.flags, arg.mine);
  const end = Date.now() + arg.limitMs;
  while (Atomics.load(arg.flags, arg.peer) === 0) {
    const left = end - Date.now();
    if (left <= 0) return { met: false };
    Atomics.wait(arg.flags, arg.peer, 0, left);
  }
  return { met: true };
}

// ---- Signal-processing steps: each task runs one kernel on a block of whole traces ----

import { filterTraces, type FilterTracesArgs } from "../kernels/filter";
import { agcTraces, normaliseTraces, timePowerTraces } from "../kernels/gain";
import { applyMutes, type MuteLines } from "../kernels/mute";
import { aicPicks, staLtaPicks, type PickPosition, type PickSearchWindow } from "../kernels/pickers";
import { lineSourceTraces, type LineSourceArgs } from "../kernels/line-source";
import { resampleTraces, type TimeGrid } from "../kernels/resample";
import { amplitudeSpectra } from "../kernels/spectrum";

/** Frequency filter on a block `[trace][sample]`; the result buffer moves back to the caller. */
export function filterTraceBlock(arg: FilterTracesArgs): Float32Array {
  return Piscina.move(filterTraces(arg)) as unknown as Float32Array;
}

/** Gain of one kind on a block; returns the samples (moved) and, for normalisation, the per-trace factors. */
export function gainTraceBlock(arg: {
  data: Float32Array;
  traceCount: number;
  sampleCount: number;
  kind: "trace-max" | "trace-rms" | "agc" | "time-power";
  agcWindowSamples: number;
  startTimeS: number;
  sampleIntervalS: number;
  timePower: number;
}): { data: Float32Array; scales: Float64Array | null } {
  const { data, traceCount: tc, sampleCount: ns } = arg;
  if (arg.kind === "trace-max" || arg.kind === "trace-rms") {
    const r = normaliseTraces(data, tc, ns, arg.kind === "trace-max" ? "max" : "rms");
    // piscina moves only a top-level Piscina.move() result; inside an object the arrays are copied.
    return { data: r.data, scales: r.scales };
  }
  const out =
    arg.kind === "agc"
      ? agcTraces(data, tc, ns, arg.agcWindowSamples)
      : timePowerTraces(data, tc, ns, arg.startTimeS, arg.sampleIntervalS, arg.timePower);
  return { data: out, scales: null };
}

/** Mutes on a block (line arrays cover the block's traces). */
export function muteTraceBlock(arg: {
  data: Float32Array;
  traceCount: number;
  sampleCount: number;
  startTimeS: number;
  sampleIntervalS: number;
  lines: MuteLines;
  taperS: number;
}): { data: Float32Array; mutedTraces: number } {
  const r = applyMutes(arg.data, arg.traceCount, arg.sampleCount, arg.startTimeS, arg.sampleIntervalS, arg.lines, arg.taperS);
  return { data: r.data, mutedTraces: r.mutedTraces };
}

/** First-arrival picks on a block: STA/LTA, optionally refined by AIC around each pick, or AIC alone. */
export function pickTraceBlock(arg: {
  data: Float32Array;
  traceCount: number;
  sampleCount: number;
  method: "energy-ratio" | "information-criterion";
  window: PickSearchWindow;
  triggerRatio: number;
  /** Where an energy-ratio pick sits (see staLtaPicks). */
  pickAt: PickPosition;
  /** AIC half window around the energy-ratio pick, samples; 0 = AIC over the whole search window. */
  aicHalfWidth: number;
}): { index: Float64Array; quality: Float64Array } {
  const { data, traceCount: tc, sampleCount: ns, window } = arg;
  if (arg.method === "energy-ratio") return staLtaPicks(data, tc, ns, window, arg.triggerRatio, arg.pickAt);
  if (arg.aicHalfWidth > 0) {
    const first = staLtaPicks(data, tc, ns, window, arg.triggerRatio, arg.pickAt);
    return aicPicks(data, tc, ns, window, { centres: first.index, halfWidth: arg.aicHalfWidth });
  }
  return aicPicks(data, tc, ns, window);
}

/** Point-to-line-source conversion on a block. */
export function lineSourceTraceBlock(arg: LineSourceArgs): Float32Array {
  return Piscina.move(lineSourceTraces(arg)) as unknown as Float32Array;
}

/** Resampling of a block onto a new time grid (anti-alias filter included). */
export function resampleTraceBlock(arg: {
  data: Float32Array;
  traceCount: number;
  sampleCount: number;
  startTimeS: number;
  sampleIntervalS: number;
  grid: TimeGrid;
  antiAliasFraction: number;
}): Float32Array {
  const out = resampleTraces(arg.data, arg.traceCount, arg.sampleCount, arg.startTimeS, arg.sampleIntervalS, arg.grid, arg.antiAliasFraction);
  return Piscina.move(out) as unknown as Float32Array;
}

/** Amplitude spectra of a block, `[trace][frequency]`. */
export function spectraTraceBlock(arg: {
  data: Float32Array;
  traceCount: number;
  sampleCount: number;
  sampleIntervalS: number;
  taperFraction: number;
  maxFrequencyHz: number;
}): Float32Array {
  const r = amplitudeSpectra(arg.data, arg.traceCount, arg.sampleCount, arg.sampleIntervalS, arg.taperFraction, arg.maxFrequencyHz);
  return Piscina.move(r.perTrace) as unknown as Float32Array;
}

// ---- Elastic finite-difference solver: one shot per task, and the solver bench ----

import { simulateShot, timeKernelSteps, type ShotPositions, type SimulationOptions } from "../kernels/fd/simulation";
import type { ElasticModel } from "../types";
import { shotGradient, type ShotGradientInput, type ShotGradientOutput } from "../kernels/fwi/shot-gradient";

/** Models one shot (pipeline/kernels/fd/simulation.ts); traces `[receiver][sample]` come back. */
export function modelShotTask(arg: { model: ElasticModel; shot: ShotPositions; options: SimulationOptions }) {
  return simulateShot(arg.model, arg.shot, arg.options);
}

/**
 * Misfit, synthetics and (when asked) the adjoint-state gradient of one shot
 * (pipeline/kernels/fwi/shot-gradient.ts). The result's arrays (synthetics, per-trace misfits,
 * gradients, illumination) move back to the caller instead of being copied.
 */
export function shotGradientTask(arg: ShotGradientInput): ShotGradientOutput {
  const out = shotGradient(arg);
  const arrays = [out.synthetic, out.traceMisfits, out.gradient?.vp, out.gradient?.vs, out.gradient?.rho, out.illumination];
  const buffers = arrays.filter((a) => a !== undefined).map((a) => a.buffer as ArrayBuffer);
  // A Transferable in piscina's sense: the value, and the buffers to move with it.
  const movable = { [Piscina.transferableSymbol]: buffers, [Piscina.valueSymbol]: out } as unknown as Parameters<typeof Piscina.move>[0];
  return Piscina.move(movable) as unknown as ShotGradientOutput;
}

/** Times solver steps on a homogeneous model in this worker (the solver bench). */
export function solverBenchTask(arg: Parameters<typeof timeKernelSteps>[0]) {
  return timeKernelSteps(arg);
}

// ---- Surface-wave profiles: one window's dispersion curve inverted per task ----

import { invertDispersionCurve, type CurveInversionOptions, type CurveInversionResult } from "../kernels/dispersion/inversion";

/** Inverts one picked dispersion curve for a layered Vs profile (see kernels/dispersion/inversion.ts). */
export function invertDispersionCurveTask(arg: { frequenciesHz: Float64Array; velocitiesMps: Float64Array; options: CurveInversionOptions }): CurveInversionResult {
  return invertDispersionCurve(arg.frequenciesHz, arg.velocitiesMps, arg.options);
}

import { timeWasmKernel, type KernelTimingOptions } from "../kernels/fd/kernel-timing";

/** Times the WebAssembly kernel directly in this worker (the solver bench against the C yardstick). */
export function kernelBenchTask(arg: KernelTimingOptions) {
  return timeWasmKernel(arg);
}
