/**
 * The contract every processing step fulfils. One module per step under pipeline/steps/,
 * each exporting one `defineStep({...})` value that the registry lists in order.
 *
 * A step is pure: it reads its input slots and parameters and returns output slots.
 * It does no file I/O, prints nothing and never exits the process; the runner reads and
 * writes artifacts, computes cache keys, records timings and logs.
 */
import type { z } from "zod";
import type { Logger } from "pino";
import type { SlotName, SlotValues } from "./types";
import type { WorkerPool } from "./workers/pool";
import type { ShotExecutor } from "./workers/shot-executor";

/** What the runner hands a step while it runs. */
export interface StepContext {
  /** The step's logger; lines go to SQLite and the terminal. */
  log: Logger;
  /** Aborted when the run is cancelled; long loops check it and throw. */
  signal: AbortSignal;
  /** Report progress as a fraction in [0, 1] with an optional short message. */
  progress: (fraction: number, message?: string) => void;
  /** The shared worker pool for heavy kernels. */
  pool: WorkerPool;
  /** Where per-shot work runs (the local pool, or the Redis job queue when TRACEWRIGHT_REDIS_URL is set);
   *  absent: the local pool. Steps reach it through shotExecutorOf(ctx). */
  shots?: ShotExecutor;
  /** Records an intermediate result now: written as a content-addressed artifact at once and attached to
   *  this step (kind says what it is, e.g. "model", "gradient", "synthetic"; index orders records of one
   *  kind, e.g. the iteration), visible to `tracewright show` and the control room while the step runs.
   *  value: any artifact-codec-able plain data (as slot values). Returns the artifact hash. */
  recordIntermediate(entry: { kind: string; index: number; label?: string; value: unknown; meta?: Record<string, unknown> }): string;
  /** Appends points to a named series at once (created on first call); stored with the step while it runs. */
  extendSeries(series: { name: string; xLabel: string; yLabel: string }, points: Array<{ x: number; y: number; group?: string }>): void;
  /** Saves this step's checkpoint (artifact-codec-able plain data), replacing the previous one. Kept under the
   *  step's cache key, so a resumed run (same cache key) finds it. */
  saveCheckpoint(value: unknown): void;
  /** The latest checkpoint saved under this step's cache key, or null. */
  loadCheckpoint(): unknown | null;
}

/** A named series a step records (drawn as a chart in the control room). */
export interface StepSeries {
  /** Machine name, e.g. "misfit". */
  name: string;
  /** Label of the x axis with unit, e.g. "iteration". */
  xLabel: string;
  /** Label of the y axis with unit. */
  yLabel: string;
  points: Array<{ x: number; y: number; group?: string }>;
}

/** What a step returns. */
export interface StepResult {
  /** Output slot values; exactly the slots the step declares in `writes` (optional ones may be absent). */
  outputs: Partial<SlotValues>;
  /** A short JSON summary for the run record (counts, measured figures). */
  summary?: Record<string, unknown>;
  /** Curves to chart. */
  series?: StepSeries[];
  /** Field files the step refused (the run went on without them); the runner records them with the run. */
  rejectedFiles?: Array<{ file: string; reason: string }>;
}

/** Input slots handed to run(): required slots are present, optional ones may be undefined. */
export type StepInput = Partial<SlotValues>;

export interface StepDefinition<S extends z.ZodType = z.ZodType> {
  /** Stable id used in pipeline files, e.g. "band-pass". Never change it once released. */
  id: string;
  /** Bump to invalidate cached results when the step's output for the same input changes. */
  version: number;
  /** One-line title for listings. */
  title: string;
  /** A paragraph: what it does, with the method or standard named. */
  description: string;
  /** Slots that must be present before the step runs. */
  reads: SlotName[];
  /** Slots used when present (e.g. picks for a mute). */
  optionalReads?: SlotName[];
  /** Slots the step writes. */
  writes: SlotName[];
  /** zod schema of the parameters; every field has a default and a `.describe()` with its unit. */
  params: S;
  /** Optional checks that need input data (e.g. corner frequency against Nyquist); throw StepInputError. */
  run: (input: StepInput, params: z.output<S>, ctx: StepContext) => Promise<StepResult>;
}

/** A step of any parameter type, as the registry holds them. */
// eslint-disable-next-line @typescript-eslint/no-explicit-any
export type AnyStepDefinition = StepDefinition<any>;

/** Identity helper that keeps the params type attached to run(). */
export function defineStep<S extends z.ZodType>(def: StepDefinition<S>): StepDefinition<S> {
  return def;
}

/** Thrown by a step when its input or parameters cannot be processed; the message is shown to people as is. */
export class StepInputError extends Error {
  constructor(
    message: string,
    /** Parameter or input field the problem is about, when there is one. */
    readonly field?: string,
  ) {
    super(message);
    this.name = "StepInputError";
  }
}

/** Throws an AbortError-like error if the signal is aborted. Call between units of work. */
export function throwIfAborted(signal: AbortSignal): void {
  if (signal.aborted) {
    const err = new Error("cancelled");
    err.name = "AbortError";
    throw err;
  }
}
