/**
 * Builds small gathers for step tests: a line of receivers either side of a source, samples
 * filled by a caller-given function of (trace, time).
 */
import type { Gather, TraceHeader } from "../../../pipeline/types";

export interface GatherShape {
  id?: string;
  traceCount: number;
  sampleCount: number;
  sampleIntervalS: number;
  startTimeS?: number;
  sourcePoint?: number;
  sourceX?: number;
  firstReceiverX?: number;
  receiverSpacingM?: number;
}

/** A gather whose sample (trace t, time s) is `fill(t, s, header)`. */
export function makeGather(shape: GatherShape, fill: (trace: number, timeS: number, header: TraceHeader) => number = () => 0): Gather {
  const {
    id = "sp01",
    traceCount,
    sampleCount,
    sampleIntervalS,
    startTimeS = 0,
    sourcePoint = 1,
    sourceX = -1,
    firstReceiverX = 0,
    receiverSpacingM = 1,
  } = shape;
  const traces: TraceHeader[] = [];
  const data = new Float32Array(traceCount * sampleCount);
  for (let t = 0; t < traceCount; t++) {
    const receiverX = firstReceiverX + t * receiverSpacingM;
    const header: TraceHeader = {
      sourceFile: `${id}.sg2`,
      channel: t + 1,
      sourcePoint,
      blow: 0,
      sourceX,
      sourceZ: 0,
      receiverX,
      receiverZ: 0,
      offset: receiverX - sourceX,
      stackCount: 1,
      component: "z",
      dead: false,
    };
    traces.push(header);
    for (let i = 0; i < sampleCount; i++) data[t * sampleCount + i] = fill(t, startTimeS + i * sampleIntervalS, header);
  }
  return { id, sampleIntervalS, sampleCount, startTimeS, traces, data };
}

/** Ricker wavelet of peak frequency `fp` (Hz) centred at time 0: (1 − 2π²f²t²) e^(−π²f²t²). */
export function ricker(t: number, fp: number): number {
  const a = (Math.PI * fp * t) ** 2;
  return (1 - 2 * a) * Math.exp(-a);
}
