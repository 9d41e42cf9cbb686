/** Round axis ticks ("nice numbers": steps of 1, 2 or 5 times a power of ten; common practice). */

/** A step of 1, 2 or 5 × 10^k giving about `target` intervals over `range`. */
export function niceStep(range: number, target: number): number {
  if (!(range > 0) || !Number.isFinite(range)) return 1;
  const raw = range / Math.max(1, target);
  const p = Math.pow(10, Math.floor(Math.log10(raw)));
  const n = raw / p;
  return (n < 1.5 ? 1 : n < 3.5 ? 2 : n < 7.5 ? 5 : 10) * p;
}

/** Tick values from lo to hi inclusive on a nice step, each rounded to the step's decimals (no 0.30000000000000004). */
export function niceTicks(lo: number, hi: number, target = 5): number[] {
  if (!Number.isFinite(lo) || !Number.isFinite(hi)) return [];
  if (hi < lo) [lo, hi] = [hi, lo];
  if (hi === lo) return [lo];
  const step = niceStep(hi - lo, target);
  const decimals = Math.max(0, -Math.floor(Math.log10(step)));
  const out: number[] = [];
  for (let k = Math.ceil(lo / step - 1e-9); k * step <= hi + step * 1e-9; k++) out.push(Number((k * step).toFixed(decimals)));
  return out;
}

/** A nice extent covering [lo, hi]: lo rounded down and hi up to the tick step. */
export function niceDomain(lo: number, hi: number, target = 5): [number, number] {
  if (!Number.isFinite(lo) || !Number.isFinite(hi)) return [0, 1];
  if (hi === lo) return [lo - 1, hi + 1];
  const step = niceStep(hi - lo, target);
  return [Math.floor(lo / step) * step, Math.ceil(hi / step) * step];
}

/** Tick label: at most 4 significant digits, no float noise ("199.21875" → "199.2"). */
export function tickLabel(v: number): string {
  if (!Number.isFinite(v)) return "";
  if (v === 0) return "0";
  const a = Math.abs(v);
  if (a >= 1e5 || a < 1e-3) return v.toExponential(1).replace(/\.0e/, "e");
  return String(Number(v.toPrecision(4)));
}
