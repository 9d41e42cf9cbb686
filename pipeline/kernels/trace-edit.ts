/**
 * Trace edits on a block (`[trace][sample]`): kill (zero) or reverse polarity, per trace.
 */
import { assertTraceBlock } from "./taper";

/** Per-trace action code: keep as is, kill (set to zero) or reverse polarity. */
export const TRACE_KEEP = 0;
export const TRACE_KILL = 1;
export const TRACE_REVERSE = 2;

/**
 * Applies `actions[t]` (TRACE_KEEP, TRACE_KILL or TRACE_REVERSE) to each trace; returns a new
 * array (or fills `out`).
 */
export function editTraces(
  data: Float32Array,
  traceCount: number,
  sampleCount: number,
  actions: Uint8Array,
  out?: Float32Array,
): Float32Array {
  assertTraceBlock(data, traceCount, sampleCount);
  if (actions.length !== traceCount) throw new RangeError(`actions must hold one code per trace (${traceCount}), got ${actions.length}`);
  const result = out ?? new Float32Array(data.length);
  if (result.length !== data.length) throw new RangeError(`out must hold ${data.length} samples, got ${result.length}`);
  for (let t = 0; t < traceCount; t++) {
    const a = actions[t];
    const base = t * sampleCount;
    if (a === TRACE_KILL) result.fill(0, base, base + sampleCount);
    else if (a === TRACE_REVERSE) for (let i = 0; i < sampleCount; i++) result[base + i] = -data[base + i];
    else if (a === TRACE_KEEP) result.set(data.subarray(base, base + sampleCount), base);
    else throw new RangeError(`actions[${t}] must be 0 (keep), 1 (kill) or 2 (reverse), got ${a}`);
  }
  return result;
}
