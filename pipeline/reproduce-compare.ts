/**
 * Comparing two decoded artifacts (slot values) for a reproduction: same structure and the same
 * non-numeric values required; numbers compared with a relative tolerance.
 *
 * The relative difference of a numeric array is max|a − b| / max|a|, the largest difference
 * over the reference array's peak magnitude (a plain number is its own array of one). Samples
 * near zero in a trace would make a sample-by-sample ratio meaningless, so the peak is the scale.
 *
 * Why results may differ at all: a floating-point sum depends on the order of its terms. For n
 * terms the error bound is |E| ≤ γ(n−1) Σ|xᵢ| with γ(k) = k·u/(1 − k·u), u the unit roundoff
 * (Higham 2002, Accuracy and Stability of Numerical Algorithms, 2nd ed., §4.2, from memory):
 * for float32 (u = 2⁻²⁴ ≈ 6·10⁻⁸) and a hundred per-shot terms, about 6·10⁻⁶ of the sum of
 * magnitudes. DEFAULT_RELATIVE_TOLERANCE, 1e-5, allows that and no more; the engine sums
 * per-shot results in shot order, so in practice reproductions are identical bit for bit.
 */

/** Default tolerance on the relative difference of numeric arrays (see the module comment). */
export const DEFAULT_RELATIVE_TOLERANCE = 1e-5;

export interface ValueComparison {
  /** Same structure and the same non-numeric values (numbers may differ). */
  sameShape: boolean;
  /** Where the shapes first differ, e.g. "gathers[3].traces: 48 against 47 elements". */
  shapeDifference?: string;
  /** Largest relative difference of any numeric array (see the module comment); 0 when all equal. */
  maxRelativeDifference: number;
  /** Largest absolute difference of any number. */
  maxAbsoluteDifference: number;
  /** Path of the array with the largest relative difference. */
  worstAt?: string;
}

type Numeric = ArrayLike<number>;

const isTyped = (v: unknown): v is Numeric => ArrayBuffer.isView(v) && !(v instanceof DataView);

/** Compares a reproduced value `b` with the recorded value `a`. */
export function compareValues(a: unknown, b: unknown): ValueComparison {
  const out: ValueComparison = { sameShape: true, maxRelativeDifference: 0, maxAbsoluteDifference: 0 };
  const differ = (where: string, what: string) => {
    if (out.sameShape) {
      out.sameShape = false;
      out.shapeDifference = `${where || "value"}: ${what}`;
    }
  };
  const numbers = (x: Numeric, y: Numeric, where: string) => {
    if (x.length !== y.length) return differ(where, `${x.length} against ${y.length} elements`);
    let peak = 0;
    let worst = 0;
    for (let i = 0; i < x.length; i++) {
      const p = x[i];
      const q = y[i];
      if (Number.isNaN(p) || Number.isNaN(q)) {
        if (Number.isNaN(p) !== Number.isNaN(q)) return differ(`${where}[${i}]`, `${p} against ${q}`);
        continue;
      }
      if (!Number.isFinite(p) || !Number.isFinite(q)) {
        if (p !== q) return differ(`${where}[${i}]`, `${p} against ${q}`);
        continue;
      }
      const m = Math.abs(p);
      if (m > peak) peak = m;
      const d = Math.abs(p - q);
      if (d > worst) worst = d;
    }
    if (worst > out.maxAbsoluteDifference) out.maxAbsoluteDifference = worst;
    const rel = worst === 0 ? 0 : peak === 0 ? Infinity : worst / peak;
    if (rel > out.maxRelativeDifference) {
      out.maxRelativeDifference = rel;
      out.worstAt = where || "value";
    }
  };
  const walk = (x: unknown, y: unknown, where: string): void => {
    if (!out.sameShape) return;
    if (isTyped(x) || isTyped(y)) {
      if (!isTyped(x) || !isTyped(y) || x.constructor !== y.constructor) return differ(where, "different kinds of array");
      return numbers(x, y, where);
    }
    if (typeof x === "number" && typeof y === "number") return numbers([x], [y], where);
    if (Array.isArray(x) || Array.isArray(y)) {
      if (!Array.isArray(x) || !Array.isArray(y)) return differ(where, "a list against something else");
      if (x.length !== y.length) return differ(where, `${x.length} against ${y.length} entries`);
      x.forEach((v, i) => walk(v, y[i], `${where}[${i}]`));
      return;
    }
    if (x !== null && y !== null && typeof x === "object" && typeof y === "object") {
      const kx = Object.keys(x).sort();
      const ky = Object.keys(y).sort();
      if (kx.join("\0") !== ky.join("\0")) return differ(where, `fields ${kx.join(", ")} against ${ky.join(", ")}`);
      for (const k of kx) walk((x as Record<string, unknown>)[k], (y as Record<string, unknown>)[k], where ? `${where}.${k}` : k);
      return;
    }
    if (x !== y) differ(where, `${JSON.stringify(x)} against ${JSON.stringify(y)}`);
  };
  walk(a, b, "");
  return out;
}
