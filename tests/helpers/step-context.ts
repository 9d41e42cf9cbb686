/**
 * A StepContext for running steps in tests: a silent pino logger, a fresh abort signal, a
 * progress callback that records what it is given, and no worker pool unless one is passed.
 */
import { pino } from "pino";
import type { StepContext } from "../../pipeline/step";
import { memoryStepRecorder, type MemoryRecords } from "../../pipeline/step-records";
import type { WorkerPool } from "../../pipeline/workers/pool";

export interface TestStepContext extends StepContext {
  /** Every progress call, in order. */
  progressCalls: Array<{ fraction: number; message?: string }>;
  /** Aborts `signal`. */
  abort: () => void;
  /** What the step recorded along the way (intermediates, series, its checkpoint). */
  records: MemoryRecords;
}

/** Builds a context for a step under test. Pass `pool` when the step uses the worker pool. */
export function makeStepContext(options: { pool?: WorkerPool; level?: string } = {}): TestStepContext {
  const controller = new AbortController();
  const progressCalls: Array<{ fraction: number; message?: string }> = [];
  return {
    log: pino({ level: options.level ?? "silent" }),
    signal: controller.signal,
    progress: (fraction, message) => {
      progressCalls.push({ fraction, message });
    },
    pool: options.pool ?? (undefined as never),
    ...memoryStepRecorder(),
    progressCalls,
    abort: () => controller.abort(),
  };
}
