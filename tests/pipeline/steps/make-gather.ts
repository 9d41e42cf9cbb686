/**
 * Builds small gathers for step tests: a line of receivers either side of a source, samples
 * filled by a caller-given function of (trace, time).
 */
import type { Gather, GatherSet, TraceHeader } from "../../../pipeline/types";
import { seededRandom } from "../../helpers/random";

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

/**
 * 48-trace gather sp01, source at −1 m, receivers 0 … 47 m (channels 1 … 48), 0.25 ms sampling
 * from −10 ms: a direct wave at 400 m/s (onset at |offset| / 400 s, a one-sided 60 Hz pulse) in
 * seeded noise of 1/20 of its peak. Trace 30 (channel 31) arrives 15 ms late, as if its receiver
 * were logged 6 m off, so an automatic pick there lies off the offset trend. Returns the onsets.
 */
export function refractionGather(): { set: GatherSet; onsets: number[] } {
  const rnd = seededRandom(404);
  const onsets: number[] = [];
  const g = makeGather({ id: "sp01", traceCount: 48, sampleCount: 1600, sampleIntervalS: 0.00025, startTimeS: -0.01 }, (t, time, h) => {
    const onset = Math.abs(h.offset) / 400 + (t === 30 ? 0.015 : 0);
    onsets[t] = onset;
    const tau = time - onset;
    const pulse = tau >= 0 ? Math.sin(2 * Math.PI * 60 * tau) * Math.exp(-tau * 60) : 0;
    return pulse + 0.05 * rnd.gaussian();
  });
  return { set: { kind: "gathers", gathers: [g] }, onsets };
}
