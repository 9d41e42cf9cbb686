/**
 * Limited-memory BFGS (Nocedal & Wright 2006, Numerical Optimization, 2nd ed., §7.2) with the
 * two-loop recursion (algorithm 7.4), initial matrix H₀ = γI with γ = sᵀy / yᵀy of the newest pair
 * (eq. 7.20, equation number from memory), and a strong Wolfe line search (./line-search.ts, algorithms 3.5 and 3.6).
 *
 * Resumable by design: {@link LbfgsState} is plain data (typed arrays and numbers, so
 * `structuredClone` or any typed-array serialiser keeps it whole), {@link lbfgsIteration} is one
 * iteration as a separate call that never writes into its input state (the new state shares the
 * unchanged pair arrays with it), and the result depends only on the
 * state, the objective and the options, so an iteration resumed from a stored state gives the same
 * iterate bit for bit.
 *
 * Pairs: after each accepted step the pair s = x₊ − x, y = g₊ − g is stored when
 * sᵀy > CURVATURE_EPSILON · ‖s‖ ‖y‖ (skipped otherwise, so H stays positive definite; N&W §7.2 and
 * common practice), keeping the newest `memory` pairs.
 *
 * First step: with no stored pair (the first iteration, or after every pair was skipped) the
 * direction is steepest descent scaled so that the trial step changes the largest component of x by
 * `initialStep` (in units of x); with pairs, the quasi-Newton step is tried at α = 1.
 *
 * Bounds by projection (`project`, in place): trial points are x(α) = P(x + α p). Components the
 * projection already holds at the start of the iteration (found by projecting a very short step
 * along p) are removed from p; along the path, components the projection changes are left out of
 * φ'(α) (exact for box bounds, a first-order approximation for coupled bounds such as a minimum
 * Vp/Vs). A step that reaches a bound while φ still falls is accepted on the Armijo condition alone
 * (`wolfe.curvature: false`; see ./line-search.ts). The convergence measure with bounds is the
 * projected gradient ‖P(x − g) − x‖∞.
 */
import { DEFAULT_C1, DEFAULT_C2, DEFAULT_LINE_SEARCH_EVALUATIONS, lineSearchSettings, strongWolfeLineSearch, type LineSearchPoint } from "./line-search";

/** Optimiser memory and current point; plain serialisable data. */
export interface LbfgsState {
  x: Float64Array;
  f: number;
  g: Float64Array;
  /** Stored steps s = x₊ − x, oldest first. */
  s: Float64Array[];
  /** Stored gradient changes y = g₊ − g, oldest first. */
  y: Float64Array[];
  /** Iterations done. */
  iteration: number;
  /** Objective evaluations so far, counting the one at the start point. */
  evaluations: number;
}

/** Settings of {@link lbfgsIteration}. */
export interface LbfgsOptions {
  /** Pairs kept (m). @default 5 */
  memory?: number;
  /** Sufficient-decrease constant of the line search. @default 1e-4 */
  c1?: number;
  /** Curvature constant of the line search. @default 0.9 */
  c2?: number;
  /** Objective evaluations per line search. @default 8 */
  maxEvaluations?: number;
  /** First iteration's step along −g, in units of x (largest component change); later iterations try 1. @default 0.1 */
  initialStep?: number;
  /** Bounds by projection, in place. */
  project?: (x: Float64Array) => void;
}

/** The objective: value and gradient at x (x must not be kept or mutated). */
export type Objective = (x: Float64Array) => Promise<{ f: number; g: Float64Array }>;

/** Outcome of one iteration. */
export interface LbfgsStepResult {
  /** The new state (the old point, with evaluations counted, when the iteration stopped). */
  state: LbfgsState;
  /** Accepted α along the search direction (0 when stopped). */
  stepLength: number;
  /** Objective evaluations in this iteration. */
  evaluations: number;
  /** Which Wolfe conditions held at the accepted step. */
  wolfe: { armijo: boolean; curvature: boolean };
  /** Why no step was taken, if none was. */
  stopped?: "line-search-failed" | "no-descent";
}

export const DEFAULT_MEMORY = 5;
export const DEFAULT_INITIAL_STEP = 0.1;
/** A pair is skipped when sᵀy ≤ CURVATURE_EPSILON · ‖s‖ ‖y‖. */
export const CURVATURE_EPSILON = 1e-8;

function dot(a: Float64Array, b: Float64Array): number {
  let sum = 0;
  for (let i = 0; i < a.length; i++) sum += a[i] * b[i];
  return sum;
}

function maxAbs(a: Float64Array): number {
  let m = 0;
  for (let i = 0; i < a.length; i++) m = Math.max(m, Math.abs(a[i]));
  return m;
}

function checkGradient(name: string, g: Float64Array, n: number, f: number): void {
  if (g.length !== n) throw new RangeError(`${name} gradient must hold ${n} values, got ${g.length}`);
  if (!Number.isFinite(f)) throw new RangeError(`${name} objective value must be finite, got ${f}`);
}

/** Starts the optimiser at x0 with the objective's value and gradient there (copied). */
export function startLbfgs(x0: Float64Array, first: { f: number; g: Float64Array }): LbfgsState {
  checkGradient("first", first.g, x0.length, first.f);
  return { x: new Float64Array(x0), f: first.f, g: new Float64Array(first.g), s: [], y: [], iteration: 0, evaluations: 1 };
}

/** Two-loop recursion (N&W algorithm 7.4): returns −H g. */
function twoLoopDirection(g: Float64Array, s: Float64Array[], y: Float64Array[]): Float64Array {
  const k = s.length;
  const q = new Float64Array(g);
  const alpha = new Float64Array(k);
  const rho = new Float64Array(k);
  for (let i = k - 1; i >= 0; i--) {
    rho[i] = 1 / dot(y[i], s[i]);
    alpha[i] = rho[i] * dot(s[i], q);
    const yi = y[i];
    for (let j = 0; j < q.length; j++) q[j] -= alpha[i] * yi[j];
  }
  const gamma = dot(s[k - 1], y[k - 1]) / dot(y[k - 1], y[k - 1]);
  for (let j = 0; j < q.length; j++) q[j] *= gamma;
  for (let i = 0; i < k; i++) {
    const beta = rho[i] * dot(y[i], q);
    const si = s[i];
    for (let j = 0; j < q.length; j++) q[j] += si[j] * (alpha[i] - beta);
  }
  for (let j = 0; j < q.length; j++) q[j] = -q[j];
  return q;
}

/** Components of x that the projection holds when stepping a very short way along p. */
function blockedComponents(x: Float64Array, p: Float64Array, project: (x: Float64Array) => void): Uint8Array {
  const blocked = new Uint8Array(x.length);
  const pMax = maxAbs(p);
  if (pMax === 0) return blocked;
  const t = (1e-7 * (1 + maxAbs(x))) / pMax;
  const trial = new Float64Array(x.length);
  for (let i = 0; i < x.length; i++) trial[i] = x[i] + t * p[i];
  const free = new Float64Array(trial);
  project(trial);
  for (let i = 0; i < x.length; i++) if (trial[i] !== free[i]) blocked[i] = 1;
  return blocked;
}

/** Projected-gradient size ‖P(x − g) − x‖∞ (‖g‖∞ without bounds). */
export function projectedGradientNorm(x: Float64Array, g: Float64Array, project?: (x: Float64Array) => void): number {
  if (!project) return maxAbs(g);
  const t = new Float64Array(x.length);
  for (let i = 0; i < x.length; i++) t[i] = x[i] - g[i];
  project(t);
  let m = 0;
  for (let i = 0; i < x.length; i++) m = Math.max(m, Math.abs(t[i] - x[i]));
  return m;
}

interface Evaluated {
  x: Float64Array;
  f: number;
  g: Float64Array;
}

/**
 * One L-BFGS iteration from `state`: direction by the two-loop recursion, strong Wolfe line search,
 * pair update. `state` is not mutated.
 */
export async function lbfgsIteration(state: LbfgsState, objective: Objective, options: LbfgsOptions = {}): Promise<LbfgsStepResult> {
  const memory = options.memory ?? DEFAULT_MEMORY;
  const initialStep = options.initialStep ?? DEFAULT_INITIAL_STEP;
  if (!Number.isInteger(memory) || memory < 1) throw new RangeError(`memory must be a whole number ≥ 1, got ${memory}`);
  if (!(initialStep > 0 && Number.isFinite(initialStep))) throw new RangeError(`initialStep must be a positive number, got ${initialStep}`);
  const search = lineSearchSettings({ c1: options.c1 ?? DEFAULT_C1, c2: options.c2 ?? DEFAULT_C2, maxEvaluations: options.maxEvaluations ?? DEFAULT_LINE_SEARCH_EVALUATIONS });
  const n = state.x.length;
  checkGradient("state", state.g, n, state.f);
  if (state.s.length !== state.y.length) throw new RangeError(`state.s and state.y must hold as many pairs, got ${state.s.length} and ${state.y.length}`);
  const { x, g, project } = { x: state.x, g: state.g, project: options.project };
  const s = state.s.slice(Math.max(0, state.s.length - memory));
  const y = state.y.slice(Math.max(0, state.y.length - memory));

  const steepest = (): Float64Array => {
    const gMax = maxAbs(g);
    const p = new Float64Array(n);
    if (gMax > 0) for (let i = 0; i < n; i++) p[i] = (-initialStep / gMax) * g[i];
    return p;
  };
  let p = s.length > 0 ? twoLoopDirection(g, s, y) : steepest();
  let blocked = project ? blockedComponents(x, p, project) : null;
  const mask = (dir: Float64Array, b: Uint8Array | null) => {
    if (b) for (let i = 0; i < n; i++) if (b[i]) dir[i] = 0;
  };
  mask(p, blocked);
  let dphi0 = dot(g, p);
  if (!(dphi0 < 0) && s.length > 0) {
    // Rounding or the bounds left no descent along the quasi-Newton direction: fall back to steepest descent.
    p = steepest();
    blocked = project ? blockedComponents(x, p, project) : null;
    mask(p, blocked);
    dphi0 = dot(g, p);
  }
  const unchanged = (stopped: LbfgsStepResult["stopped"], evaluations: number): LbfgsStepResult => ({
    state: { ...cloneState(state), evaluations: state.evaluations + evaluations },
    stepLength: 0,
    evaluations,
    wolfe: { armijo: false, curvature: false },
    stopped,
  });
  if (!(dphi0 < 0)) return unchanged("no-descent", 0);

  const evaluate = async (alpha: number): Promise<LineSearchPoint<Evaluated>> => {
    const xa = new Float64Array(n);
    for (let i = 0; i < n; i++) xa[i] = x[i] + alpha * p[i];
    let held: Uint8Array | null = null;
    if (project) {
      const free = new Float64Array(xa);
      project(xa);
      for (let i = 0; i < n; i++) {
        if (xa[i] !== free[i]) {
          held ??= new Uint8Array(n);
          held[i] = 1;
        }
      }
    }
    const { f, g: ga } = await objective(new Float64Array(xa));
    if (ga.length !== n) throw new RangeError(`objective gradient must hold ${n} values, got ${ga.length}`);
    let dphi = 0;
    let linear = 0;
    for (let i = 0; i < n; i++) {
      if (!held || !held[i]) dphi += ga[i] * p[i];
      linear += g[i] * (xa[i] - x[i]);
    }
    return { alpha, phi: Number.isFinite(f) ? f : Number.POSITIVE_INFINITY, dphi, linear, atBound: held !== null, payload: { x: xa, f, g: new Float64Array(ga) } };
  };

  const result = await strongWolfeLineSearch(state.f, dphi0, evaluate, 1, search);
  if (!result.point) return unchanged("line-search-failed", result.evaluations);
  const next = result.point.payload;
  const sNew = new Float64Array(n);
  const yNew = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    sNew[i] = next.x[i] - x[i];
    yNew[i] = next.g[i] - g[i];
  }
  const sy = dot(sNew, yNew);
  // Pair arrays are shared with the input state: no iteration ever writes into a state's arrays.
  const sPairs = s.slice();
  const yPairs = y.slice();
  if (sy > CURVATURE_EPSILON * Math.sqrt(dot(sNew, sNew) * dot(yNew, yNew))) {
    sPairs.push(sNew);
    yPairs.push(yNew);
    while (sPairs.length > memory) {
      sPairs.shift();
      yPairs.shift();
    }
  }
  return {
    state: { x: next.x, f: next.f, g: next.g, s: sPairs, y: yPairs, iteration: state.iteration + 1, evaluations: state.evaluations + result.evaluations },
    stepLength: result.point.alpha,
    evaluations: result.evaluations,
    wolfe: { armijo: result.armijo, curvature: result.curvature },
  };
}

function cloneState(state: LbfgsState): LbfgsState {
  return {
    x: new Float64Array(state.x),
    f: state.f,
    g: new Float64Array(state.g),
    s: state.s.map((v) => new Float64Array(v)),
    y: state.y.map((v) => new Float64Array(v)),
    iteration: state.iteration,
    evaluations: state.evaluations,
  };
}

/**
 * Minimises `objective` from x0 (projected first when `project` is given): iterations until
 * `maxIterations`, a stop (see {@link LbfgsStepResult}), or the (projected) gradient's largest
 * component falls to `gradientTolerance` (@default 0: never).
 */
export async function minimiseLbfgs(
  x0: Float64Array,
  objective: Objective,
  options: LbfgsOptions & { maxIterations: number; gradientTolerance?: number },
): Promise<{ state: LbfgsState; history: LbfgsStepResult[] }> {
  const { maxIterations, gradientTolerance = 0 } = options;
  if (!Number.isInteger(maxIterations) || maxIterations < 0) throw new RangeError(`maxIterations must be a whole number ≥ 0, got ${maxIterations}`);
  if (!(gradientTolerance >= 0)) throw new RangeError(`gradientTolerance must be ≥ 0, got ${gradientTolerance}`);
  const start = new Float64Array(x0);
  options.project?.(start);
  const first = await objective(new Float64Array(start));
  let state = startLbfgs(start, first);
  const history: LbfgsStepResult[] = [];
  for (let k = 0; k < maxIterations; k++) {
    if (projectedGradientNorm(state.x, state.g, options.project) <= gradientTolerance) break;
    const step = await lbfgsIteration(state, objective, options);
    history.push(step);
    state = step.state;
    if (step.stopped) break;
  }
  return { state, history };
}
