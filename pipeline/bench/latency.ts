/** Latency figures of the load figure (scripts/load-figure.ts): percentiles of response times. */

/**
 * The p-th percentile (0 < p <= 100) of `values` by the nearest-rank method: the smallest value
 * with at least p % of the values at or below it (Hyndman & Fan 1996, "Sample quantiles in
 * statistical packages", The American Statistician 50(4), definition 1, the inverse of the
 * empirical distribution function). NaN for no values.
 */
export function percentile(values: readonly number[], p: number): number {
  if (!(p > 0 && p <= 100)) throw new RangeError(`p must be in (0, 100], got ${p}`);
  if (values.length === 0) return NaN;
  const sorted = [...values].sort((a, b) => a - b);
  const rank = Math.ceil((p / 100) * sorted.length);
  return sorted[Math.min(sorted.length, Math.max(1, rank)) - 1];
}

export interface LatencySummary {
  requests: number;
  p50Ms: number;
  p95Ms: number;
  p99Ms: number;
  maxMs: number;
  meanMs: number;
}

/** Count, nearest-rank p50/p95/p99, maximum and mean of response times in ms. */
export function summariseLatency(ms: readonly number[]): LatencySummary {
  const sum = ms.reduce((a, b) => a + b, 0);
  return {
    requests: ms.length,
    p50Ms: percentile(ms, 50),
    p95Ms: percentile(ms, 95),
    p99Ms: percentile(ms, 99),
    maxMs: ms.length ? ms.reduce((a, b) => Math.max(a, b), -Infinity) : NaN,
    meanMs: ms.length ? sum / ms.length : NaN,
  };
}
