/**
 * Splitting a gather's traces into blocks for the worker pool.
 *
 * Small gathers (and runs without a pool, as in unit tests) run in-process; large ones are cut
 * into one block of whole traces per worker, each block copied once and its buffer transferred
 * (not cloned) to the worker. Results come back in trace order.
 */
import type { WorkerPool } from "./pool";

/** What the splitting needs of a step's context: its worker pool (a StepContext has one). */
type WithPool = { pool: WorkerPool };

/** Gathers with fewer samples than this run in-process: the hand-off costs more than it saves. */
export const POOL_MIN_SAMPLES = 1 << 17;

/** One block of whole traces and what was computed for it. */
export interface TraceBlockResult<R> {
  firstTrace: number;
  traceCount: number;
  result: R;
}

/** How to process one block: in-process, or in a worker (the block's buffer is transferable). */
export interface TraceBlockJob<R> {
  local: (block: Float32Array, traceCount: number, firstTrace: number) => R;
  remote: (pool: WorkerPool, block: Float32Array, traceCount: number, firstTrace: number) => Promise<R>;
}

/** Number of blocks to use for a gather of this size with this context's pool (1 = in-process). */
export function blockCountFor(ctx: WithPool, traceCount: number, sampleCount: number): number {
  const pool = ctx.pool as WorkerPool | undefined;
  if (!pool || pool.size < 2 || traceCount < 2 || traceCount * sampleCount < POOL_MIN_SAMPLES) return 1;
  return Math.min(pool.size, traceCount);
}

/** Runs `job` over blocks of whole traces of `data` (`[trace][sample]`); `data` is not mutated. */
export async function runTraceBlocks<R>(
  ctx: WithPool,
  data: Float32Array,
  traceCount: number,
  sampleCount: number,
  job: TraceBlockJob<R>,
): Promise<Array<TraceBlockResult<R>>> {
  const blocks = blockCountFor(ctx, traceCount, sampleCount);
  if (blocks === 1) return [{ firstTrace: 0, traceCount, result: job.local(data, traceCount, 0) }];
  const pool = ctx.pool;
  const per = Math.ceil(traceCount / blocks);
  const pending: Array<Promise<TraceBlockResult<R>>> = [];
  for (let first = 0; first < traceCount; first += per) {
    const count = Math.min(per, traceCount - first);
    // slice() copies, so transferring the copy leaves the caller's data intact.
    const block = data.slice(first * sampleCount, (first + count) * sampleCount);
    pending.push(job.remote(pool, block, count, first).then((result) => ({ firstTrace: first, traceCount: count, result })));
  }
  return Promise.all(pending);
}

/**
 * Runs a trace-to-trace transform over blocks and assembles the output gather data. The output
 * may have another number of samples per trace than the input (resampling): it is taken from
 * the blocks' results.
 */
export async function transformTraceBlocks(
  ctx: WithPool,
  data: Float32Array,
  traceCount: number,
  sampleCount: number,
  job: TraceBlockJob<Float32Array>,
): Promise<Float32Array> {
  const parts = await runTraceBlocks(ctx, data, traceCount, sampleCount, job);
  if (parts.length === 1) return parts[0].result;
  const perTrace = parts[0].result.length / parts[0].traceCount;
  const out = new Float32Array(traceCount * perTrace);
  for (const p of parts) {
    if (p.result.length !== p.traceCount * perTrace) throw new RangeError(`block at trace ${p.firstTrace} returned ${p.result.length} samples, expected ${p.traceCount * perTrace}`);
    out.set(p.result, p.firstTrace * perTrace);
  }
  return out;
}
