/**
 * Speed of the signal-processing steps on one gather of 96 traces × 4,000 samples (0.25 ms,
 * seeded noise plus arrivals), each step run in-process on one core (no worker pool), the way a
 * single step rerun works on a small machine. Prints nothing: the CLI `bench` command does.
 */
import { pino } from "pino";
import { memoryStepRecorder } from "../step-records";
import type { StepContext, StepDefinition } from "../step";
import type { Gather, GatherSet, SlotValues, TraceHeader } from "../types";
import type { WorkerPool } from "../workers/pool";
import { frequencyFilterStep } from "../steps/frequency-filter";
import { timeWindowStep } from "../steps/time-window";
import { firstArrivalsStep } from "../steps/first-arrivals";
import { muteStep } from "../steps/mute";
import { gainStep } from "../steps/gain";
import { traceEditStep } from "../steps/trace-edit";
import { lineSourceStep } from "../steps/line-source";
import { spectraStep } from "../steps/spectra";
import type { z } from "zod";
import { mulberry32 } from "../kernels/random";

const TRACES = 96;
const SAMPLES = 4000;
const DT = 0.00025;

/** The bench gather: receivers every 0.5 m, a 400 m/s first arrival and a 150 m/s surface wave in noise. */
export function benchGather(): Gather {
  const u = mulberry32(96_4000); // seeded: every bench run sees the same data
  const traces: TraceHeader[] = [];
  const data = new Float32Array(TRACES * SAMPLES);
  for (let t = 0; t < TRACES; t++) {
    const receiverX = t * 0.5;
    const sourceX = -1;
    traces.push({ sourceFile: "bench.sg2", channel: t + 1, sourcePoint: 1, blow: 0, sourceX, sourceZ: 0, receiverX, receiverZ: 0, offset: receiverX - sourceX, stackCount: 1, component: "z", dead: false });
    const r = Math.abs(receiverX - sourceX);
    for (let i = 0; i < SAMPLES; i++) {
      const time = -0.01 + i * DT;
      const tp = time - r / 400;
      const ts = time - r / 150;
      const p = tp >= 0 ? Math.sin(2 * Math.PI * 80 * tp) * Math.exp(-tp * 80) : 0;
      const s = Math.exp(-((ts * 40) ** 2)) * Math.cos(2 * Math.PI * 25 * ts) * 4;
      data[t * SAMPLES + i] = p + s + 0.05 * (u() + u() + u() - 1.5) + 0.02 * Math.sin(2 * Math.PI * 50 * time);
    }
  }
  return { id: "bench", sampleIntervalS: DT, sampleCount: SAMPLES, startTimeS: -0.01, traces, data };
}

function context(): StepContext {
  return {
    log: pino({ level: "silent" }),
    signal: new AbortController().signal,
    progress: () => undefined,
    pool: undefined as unknown as WorkerPool,
    ...memoryStepRecorder(),
  };
}

async function time<S extends z.ZodType>(step: StepDefinition<S>, settings: unknown, input: Partial<SlotValues>, repeats: number): Promise<number> {
  const params = step.params.parse(settings);
  await step.run(input, params, context()); // warm-up (JIT)
  let best = Infinity;
  for (let k = 0; k < repeats; k++) {
    const t0 = performance.now();
    await step.run(input, params, context());
    best = Math.min(best, performance.now() - t0);
  }
  return best;
}

/**
 * Times each signal step on the bench gather; the figure is the best of three runs after a
 * warm-up, in milliseconds.
 */
export async function benchSignalSteps(): Promise<Array<{ step: string; ms: number }>> {
  const gathers: GatherSet = { kind: "gathers", gathers: [benchGather()] };
  const input = { gathers };
  const picks = (await firstArrivalsStep.run(input, firstArrivalsStep.params.parse({}), context())).outputs.picks!;
  const rows: Array<{ step: string; ms: number }> = [];
  const add = async <S extends z.ZodType>(label: string, step: StepDefinition<S>, settings: unknown, extra: Partial<SlotValues> = {}) => {
    rows.push({ step: label, ms: await time(step, settings, { ...input, ...extra }, 3) });
  };
  await add("frequency-filter (band-pass 5-120 Hz, zero-phase, 50 Hz notch x3)", frequencyFilterStep, { mainsHz: 50 });
  await add("frequency-filter (band-pass, causal)", frequencyFilterStep, { phase: "causal" });
  await add("time-window (cut 0-500 ms)", timeWindowStep, { triggerDelayMs: 0, startMs: 0, endMs: 500 });
  await add("time-window (resample to 1 ms)", timeWindowStep, { resampleIntervalMs: 1 });
  await add("first-arrivals (energy-ratio)", firstArrivalsStep, { method: "energy-ratio" });
  await add("first-arrivals (information-criterion)", firstArrivalsStep, {});
  await add("mute (top line + bottom line)", muteStep, { topMute: "line", bottomMute: true });
  await add("mute (top at picks)", muteStep, { topMute: "picks" }, { picks });
  await add("gain (trace-rms)", gainStep, { kind: "trace-rms" });
  await add("gain (agc 100 ms)", gainStep, { kind: "agc" });
  await add("gain (time-power)", gainStep, { kind: "time-power", timePower: 2 });
  await add("trace-edit (kill 2, reverse 2)", traceEditStep, { kill: [{ sourcePoint: 1, channels: [3, 4] }], reversePolarity: [{ sourcePoint: 1, channels: [5, 6] }] });
  await add("line-source (direct-wave)", lineSourceStep, {});
  await add("spectra", spectraStep, {});
  return rows;
}
