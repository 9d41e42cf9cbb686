/**
 * Speed of the field check on a folder the size of one field day's profile: 26 source points ×
 * 4 blows of 48 channels × 2,000 samples (0.25 ms, 10 ms pre-trigger), seeded noise plus a direct
 * wave and a surface wave, run in-process on one core (no worker pool), as on a field laptop.
 * Prints nothing: the CLI `bench` command does.
 */
import { pino } from "pino";
import { memoryStepRecorder } from "../step-records";
import type { StepContext } from "../step";
import type { Gather, GatherSet, TraceHeader } from "../types";
import type { WorkerPool } from "../workers/pool";
import { fieldCheckParams, fieldCheckStep } from "../steps/field-check";
import { gaussianSource, mulberry32 } from "../kernels/random";

const SOURCE_POINTS = 26;
const BLOWS = 4;
const CHANNELS = 48;
const SAMPLES = 2000;
const DT = 0.00025;

/** The bench folder's records (seeded: every bench run sees the same data). */
export function benchFieldRecords(): GatherSet {
  const gauss = gaussianSource(mulberry32(26_4_48));
  const gathers: Gather[] = [];
  for (let sp = 1; sp <= SOURCE_POINTS; sp++) {
    const sourceX = -1 + 2 * (sp - 1);
    for (let b = 1; b <= BLOWS; b++) {
      const traces: TraceHeader[] = [];
      const data = new Float32Array(CHANNELS * SAMPLES);
      for (let c = 0; c < CHANNELS; c++) {
        const receiverX = c;
        const file = `sp${sp}-b${b}.sg2`;
        traces.push({ sourceFile: file, channel: c + 1, sourcePoint: sp, blow: b, sourceX, sourceZ: 0, receiverX, receiverZ: 0, offset: receiverX - sourceX, stackCount: 1, component: "z", dead: false });
        const r = Math.max(Math.abs(receiverX - sourceX), 0.5);
        for (let i = 0; i < SAMPLES; i++) {
          const time = -0.01 + i * DT;
          const tp = time - r / 400;
          const ts = time - r / 150;
          const p = tp >= 0 ? (Math.sin(2 * Math.PI * 60 * tp) * Math.exp(-tp * 60)) / r : 0;
          const s = (Math.exp(-((ts * 40) ** 2)) * Math.cos(2 * Math.PI * 25 * ts)) / Math.sqrt(r);
          data[c * SAMPLES + i] = p + s + 0.002 * gauss();
        }
      }
      gathers.push({ id: `sp${sp}-b${b}`, sampleIntervalS: DT, sampleCount: SAMPLES, startTimeS: -0.01, traces, data });
    }
  }
  return { kind: "gathers", gathers };
}

export interface FieldCheckBench {
  records: number;
  channels: number;
  samples: number;
  /** Wall time of the whole check per record, ms: median of the repeats, and the spread. */
  msPerRecord: { median: number; min: number; max: number };
  /** CPU time (user + system) of the process per record, ms, median. */
  cpuMsPerRecord: number;
  repeats: number;
}

/** Runs the field-check step on the bench folder `repeats` times after a warm-up. */
export async function benchFieldCheck(repeats = 3): Promise<FieldCheckBench> {
  const set = benchFieldRecords();
  const params = fieldCheckParams.parse({});
  const ctx: StepContext = {
    log: pino({ level: "silent" }),
    signal: new AbortController().signal,
    progress: () => undefined,
    pool: undefined as unknown as WorkerPool,
    ...memoryStepRecorder(),
  };
  await fieldCheckStep.run({ gathers: set }, params, ctx); // warm-up (JIT)
  const wall: number[] = [];
  const cpu: number[] = [];
  for (let i = 0; i < repeats; i++) {
    const c0 = process.cpuUsage();
    const t0 = performance.now();
    await fieldCheckStep.run({ gathers: set }, params, ctx);
    wall.push((performance.now() - t0) / set.gathers.length);
    const c = process.cpuUsage(c0);
    cpu.push((c.user + c.system) / 1000 / set.gathers.length);
  }
  const med = (v: number[]) => [...v].sort((a, b) => a - b)[v.length >> 1];
  return {
    records: set.gathers.length,
    channels: CHANNELS,
    samples: SAMPLES,
    msPerRecord: { median: med(wall), min: Math.min(...wall), max: Math.max(...wall) },
    cpuMsPerRecord: med(cpu),
    repeats,
  };
}
