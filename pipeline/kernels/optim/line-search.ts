/**
 * Line search for the strong Wolfe conditions (Nocedal & Wright 2006, Numerical Optimization,
 * 2nd ed., algorithm 3.5 with zoom, algorithm 3.6), on φ(α) = f(x(α)) along a search direction.
 *
 * Conditions at an accepted α (c1 = 1e-4 and c2 = 0.9 by default, N&W §3.1 for quasi-Newton):
 *   sufficient decrease (Armijo):  φ(α) ≤ φ(0) + c1 · ℓ(α)
 *   strong curvature:              |φ'(α)| ≤ c2 |φ'(0)|
 * where ℓ(α) is the first-order change g(x₀)·(x(α) − x₀) the evaluator reports. Without bounds
 * x(α) = x₀ + α p and ℓ(α) = α φ'(0), N&W eq. 3.7a exactly; with bounds by projection x(α) is the
 * projected point and ℓ uses the actual displacement (the Armijo rule along the projection arc,
 * Bertsekas 1976, IEEE Trans. Autom. Control 21).
 *
 * At a bound the curvature condition may be unreachable: the point is pinned and φ still falls.
 * When a trial point of the bracketing phase has some component held by the projection, satisfies
 * the Armijo condition and φ'(α) is still below c2 φ'(0), it is accepted on the Armijo condition
 * alone and reported with `curvature: false`. Every other accepted step satisfies both conditions.
 *
 * The search is asynchronous so that each φ evaluation (a forward and an adjoint solve in the
 * inversion) may run elsewhere. It never evaluates more than `maxEvaluations` points.
 */

/** One evaluated point of the line search, with whatever the caller needs to keep (`payload`). */
export interface LineSearchPoint<T> {
  alpha: number;
  /** φ(α); non-finite values are treated as failing the Armijo condition. */
  phi: number;
  /** φ'(α), the derivative along the (projected) search path. */
  dphi: number;
  /** First-order change g(x₀)·(x(α) − x₀) used in the Armijo condition (α φ'(0) without bounds). */
  linear: number;
  /** True when the projection held some component of x(α). */
  atBound: boolean;
  payload: T;
}

/** Settings of {@link strongWolfeLineSearch}. */
export interface LineSearchOptions {
  /** Sufficient-decrease constant. @default 1e-4 */
  c1?: number;
  /** Curvature constant. @default 0.9 */
  c2?: number;
  /** Most φ evaluations. @default 8 */
  maxEvaluations?: number;
  /** Largest step tried. @default 1e10 */
  alphaMax?: number;
  /** Factor between successive trial steps while bracketing. @default 4 */
  expansion?: number;
}

/** Outcome of {@link strongWolfeLineSearch}: the accepted point or null, and what held there. */
export interface LineSearchResult<T> {
  point: LineSearchPoint<T> | null;
  evaluations: number;
  armijo: boolean;
  curvature: boolean;
}

export const DEFAULT_C1 = 1e-4;
export const DEFAULT_C2 = 0.9;
export const DEFAULT_LINE_SEARCH_EVALUATIONS = 8;

/** Checks c1, c2 and maxEvaluations; returns them with defaults filled in. */
export function lineSearchSettings(o: LineSearchOptions = {}): Required<LineSearchOptions> {
  const c1 = o.c1 ?? DEFAULT_C1;
  const c2 = o.c2 ?? DEFAULT_C2;
  const maxEvaluations = o.maxEvaluations ?? DEFAULT_LINE_SEARCH_EVALUATIONS;
  const alphaMax = o.alphaMax ?? 1e10;
  const expansion = o.expansion ?? 4;
  if (!(c1 > 0 && c1 < 1)) throw new RangeError(`c1 must lie in (0, 1), got ${c1}`);
  if (!(c2 > c1 && c2 < 1)) throw new RangeError(`c2 must lie in (c1, 1) = (${c1}, 1), got ${c2}`);
  if (!Number.isInteger(maxEvaluations) || maxEvaluations < 1) throw new RangeError(`maxEvaluations must be a whole number ≥ 1, got ${maxEvaluations}`);
  if (!(alphaMax > 0)) throw new RangeError(`alphaMax must be positive, got ${alphaMax}`);
  if (!(expansion > 1)) throw new RangeError(`expansion must be greater than 1, got ${expansion}`);
  return { c1, c2, maxEvaluations, alphaMax, expansion };
}

/** A point of φ with its slope, for interpolation. */
export interface Knot {
  alpha: number;
  phi: number;
  dphi: number;
}

/**
 * Minimiser of the cubic through (a, φa, φ'a) and (b, φb, φ'b) (N&W eq. 3.59, equation number from memory), safeguarded to
 * the middle 80 % of the interval; bisection when the cubic has no usable minimiser or a value is
 * not finite.
 */
export function cubicStep(a: Knot, b: Knot): number {
  const lo = Math.min(a.alpha, b.alpha);
  const hi = Math.max(a.alpha, b.alpha);
  const mid = 0.5 * (lo + hi);
  if (![a.phi, b.phi, a.dphi, b.dphi].every(Number.isFinite)) return mid;
  const d1 = a.dphi + b.dphi - (3 * (a.phi - b.phi)) / (a.alpha - b.alpha);
  const disc = d1 * d1 - a.dphi * b.dphi;
  if (!(disc >= 0)) return mid;
  const d2 = Math.sign(b.alpha - a.alpha) * Math.sqrt(disc);
  const t = b.alpha - (b.alpha - a.alpha) * ((b.dphi + d2 - d1) / (b.dphi - a.dphi + 2 * d2));
  const margin = 0.1 * (hi - lo);
  if (!Number.isFinite(t) || t < lo + margin || t > hi - margin) return mid;
  return t;
}

/**
 * Strong Wolfe line search (N&W algorithms 3.5 and 3.6).
 * @param phi0 φ(0)
 * @param dphi0 φ'(0), must be negative (a descent direction)
 * @param evaluate evaluates φ at α > 0
 * @param alpha1 first trial step (> 0)
 */
export async function strongWolfeLineSearch<T>(
  phi0: number,
  dphi0: number,
  evaluate: (alpha: number) => Promise<LineSearchPoint<T>>,
  alpha1: number,
  options: LineSearchOptions = {},
): Promise<LineSearchResult<T>> {
  const { c1, c2, maxEvaluations, alphaMax, expansion } = lineSearchSettings(options);
  if (!Number.isFinite(phi0)) throw new RangeError(`phi0 must be finite, got ${phi0}`);
  if (!(dphi0 < 0)) throw new RangeError(`dphi0 must be negative (a descent direction), got ${dphi0}`);
  if (!(alpha1 > 0 && Number.isFinite(alpha1))) throw new RangeError(`alpha1 must be a positive number, got ${alpha1}`);
  let evaluations = 0;
  const armijoHolds = (p: LineSearchPoint<T>) => Number.isFinite(p.phi) && p.phi <= phi0 + c1 * p.linear;
  const curvatureHolds = (p: LineSearchPoint<T>) => Math.abs(p.dphi) <= -c2 * dphi0;
  const fail: LineSearchResult<T> = { point: null, evaluations: 0, armijo: false, curvature: false };

  const zoom = async (lo: Knot, hi: Knot): Promise<LineSearchResult<T>> => {
    while (evaluations < maxEvaluations) {
      if (Math.abs(hi.alpha - lo.alpha) <= 1e-14 * Math.max(lo.alpha, hi.alpha)) break;
      const alpha = cubicStep(lo, hi);
      const cur = await evaluate(alpha);
      evaluations++;
      if (!armijoHolds(cur) || cur.phi >= lo.phi) hi = cur;
      else {
        if (curvatureHolds(cur)) return { point: cur, evaluations, armijo: true, curvature: true };
        if (cur.dphi * (hi.alpha - lo.alpha) >= 0) hi = lo;
        lo = cur;
      }
    }
    return { ...fail, evaluations };
  };

  let prev: Knot = { alpha: 0, phi: phi0, dphi: dphi0 };
  let alpha = Math.min(alpha1, alphaMax);
  for (let i = 1; evaluations < maxEvaluations; i++) {
    const cur = await evaluate(alpha);
    evaluations++;
    if (!armijoHolds(cur) || (i > 1 && cur.phi >= prev.phi)) return zoom(prev, cur);
    if (curvatureHolds(cur)) return { point: cur, evaluations, armijo: true, curvature: true };
    if (cur.dphi >= 0) return zoom(cur, prev);
    // Sufficient decrease, φ still falling steeply: at a bound accept (see module comment), else extrapolate.
    if (cur.atBound) return { point: cur, evaluations, armijo: true, curvature: false };
    if (alpha >= alphaMax) break;
    prev = cur;
    alpha = Math.min(expansion * alpha, alphaMax);
  }
  return { ...fail, evaluations };
}
