import { describe, expect, it } from "vitest";
import { lbfgsIteration, minimiseLbfgs, startLbfgs, type LbfgsOptions, type LbfgsState, type Objective } from "../../../../pipeline/kernels/optim/lbfgs";
import { decodeArtifact, encodeArtifact } from "../../../../pipeline/artifact-codec";
import { seededRandom } from "../../../helpers/random";

/** Rosenbrock's function 100 (x₂ − x₁²)² + (1 − x₁)², minimum 0 at (1, 1) (Rosenbrock 1960, The Computer Journal 3; the standard test of Nocedal & Wright 2006, ch. 2 and 3). */
const rosenbrock: Objective = async (x) => {
  const [a, b] = x;
  return {
    f: 100 * (b - a * a) ** 2 + (1 - a) ** 2,
    g: new Float64Array([-400 * a * (b - a * a) - 2 * (1 - a), 200 * (b - a * a)]),
  };
};

function dot(a: Float64Array, b: Float64Array): number {
  let s = 0;
  for (let i = 0; i < a.length; i++) s += a[i] * b[i];
  return s;
}

/**
 * Strong Wolfe conditions (N&W eq. 3.7) checked from the states before and after an accepted step,
 * with d = x₊ − x = α p: f₊ ≤ f + c1 gᵀd and |g₊ᵀd| ≤ c2 |gᵀd|. Slack 1e-12 relative for the
 * rounding of x₊ − x against α p.
 */
function wolfe(before: LbfgsState, after: LbfgsState, c1 = 1e-4, c2 = 0.9): { armijo: boolean; curvature: boolean } {
  const d = after.x.map((v, i) => v - before.x[i]);
  const slope = dot(before.g, d);
  return {
    armijo: after.f <= before.f + c1 * slope + 1e-12 * Math.abs(before.f),
    curvature: Math.abs(dot(after.g, d)) <= c2 * Math.abs(slope) * (1 + 1e-12),
  };
}

async function iterate(x0: Float64Array, objective: Objective, options: LbfgsOptions, count: number, onStep?: (before: LbfgsState, after: LbfgsState, reported: { armijo: boolean; curvature: boolean }) => void) {
  let state = startLbfgs(x0, await objective(x0));
  for (let k = 0; k < count; k++) {
    const step = await lbfgsIteration(state, objective, options);
    if (step.stopped) break;
    onStep?.(state, step.state, step.wolfe);
    state = step.state;
  }
  return state;
}

describe("L-BFGS with a strong Wolfe line search", () => {
  it("finds Rosenbrock's minimum (1, 1) from (−1.2, 1) within 1e-6 (Nocedal & Wright 2006, §2.1 and ch. 3 test problem)", async () => {
    const { state, history } = await minimiseLbfgs(new Float64Array([-1.2, 1]), rosenbrock, { maxIterations: 200, gradientTolerance: 1e-12, initialStep: 1 });
    expect(Math.abs(state.x[0] - 1)).toBeLessThan(1e-6);
    expect(Math.abs(state.x[1] - 1)).toBeLessThan(1e-6);
    // Quasi-Newton methods need a few dozen iterations here (from memory; measured 39 iterations,
    // 47 evaluations); 200 is a loose ceiling that still catches a slide into steepest descent.
    expect(history.length).toBeLessThan(200);
  });

  it("satisfies the strong Wolfe conditions at every accepted step (N&W eq. 3.7, c1 = 1e-4, c2 = 0.9)", async () => {
    let steps = 0;
    const options = { initialStep: 1, memory: 5 };
    await iterate(new Float64Array([-1.2, 1]), rosenbrock, options, 60, (before, after, reported) => {
      steps++;
      const held = wolfe(before, after);
      expect(held.armijo, `iteration ${after.iteration}`).toBe(true);
      expect(held.curvature, `iteration ${after.iteration}`).toBe(true);
      expect(reported).toEqual({ armijo: true, curvature: true });
    });
    expect(steps).toBeGreaterThan(20);
  });

  it("finds the minimiser x* of a convex quadratic ½(x − x*)ᵀA(x − x*) (closed form)", async () => {
    const n = 12;
    const random = seededRandom(5);
    // A = QᵀQ + I is symmetric positive definite with smallest eigenvalue ≥ 1 (zᵀAz = ‖Qz‖² + ‖z‖²).
    const q = random.fillGaussian(new Float64Array(n * n));
    const a = new Float64Array(n * n);
    for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) {
      let s = i === j ? 1 : 0;
      for (let k = 0; k < n; k++) s += q[k * n + i] * q[k * n + j];
      a[i * n + j] = s;
    }
    const xStar = random.fillGaussian(new Float64Array(n));
    // Written about x* (½xᵀAx − bᵀx with b = Ax* plus a constant) so the minimum value is 0: a line
    // search compares values of f, and with f ~ 100 at the minimum rounding would stop it near
    // ‖x − x*‖ ~ √(ε·|f|) ≈ 1e-7 (N&W §3.5 on the limits of function-value tests).
    const quadratic: Objective = async (x) => {
      const e = x.map((v, i) => v - xStar[i]);
      const ae = new Float64Array(n);
      for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) ae[i] += a[i * n + j] * e[j];
      return { f: 0.5 * dot(e, ae), g: ae };
    };
    const { state, history } = await minimiseLbfgs(new Float64Array(n), quadratic, { maxIterations: 300, gradientTolerance: 1e-10, memory: 7 });
    expect(history.at(-1)?.stopped).toBeUndefined();
    // ‖x − x*‖₂ = ‖A⁻¹g‖₂ ≤ ‖g‖₂ / λ_min ≤ ‖g‖₂ ≤ √n · 1e-10.
    let err = 0;
    for (let i = 0; i < n; i++) err += (state.x[i] - xStar[i]) ** 2;
    expect(Math.sqrt(err)).toBeLessThanOrEqual(Math.sqrt(dot(state.g, state.g)) + 1e-15);
    expect(Math.sqrt(err)).toBeLessThan(Math.sqrt(n) * 1e-10);
  });

  it("resumes from a serialised state (structuredClone) to the identical next iterates", async () => {
    const options = { initialStep: 1, memory: 3 };
    const straight = await iterate(new Float64Array([-1.2, 1]), rosenbrock, options, 9);
    let state = await iterate(new Float64Array([-1.2, 1]), rosenbrock, options, 4);
    const stored = structuredClone(state);
    const before = structuredClone(state);
    await lbfgsIteration(state, rosenbrock, options);
    expect(state).toEqual(before); // the iteration does not mutate its input
    state = stored;
    for (let k = 0; k < 5; k++) state = (await lbfgsIteration(state, rosenbrock, options)).state;
    expect(state.iteration).toBe(9);
    expect(Array.from(state.x)).toEqual(Array.from(straight.x));
    expect(state).toEqual(straight);
  });

  it("resumes bit for bit from a state written and read by the artifact codec (how checkpoints are stored)", async () => {
    const options = { initialStep: 1, memory: 4 };
    const straight = await iterate(new Float64Array([-1.2, 1]), rosenbrock, options, 12);
    let state = await iterate(new Float64Array([-1.2, 1]), rosenbrock, options, 6);
    state = decodeArtifact(encodeArtifact(state)) as LbfgsState;
    for (let k = 0; k < 6; k++) state = (await lbfgsIteration(state, rosenbrock, options)).state;
    expect(state).toEqual(straight);
  });

  it("keeps iterates inside bounds by projection and finds the bound-constrained minimum of Rosenbrock with x₁ ≤ 0.5: (0.5, 0.25)", async () => {
    // With x₁ fixed the best x₂ is x₁² and (1 − x₁)² falls until x₁ = 1, so the minimum on x₁ ≤ 0.5 is (0.5, 0.25) (closed form).
    const project = (x: Float64Array) => {
      x[0] = Math.min(0.5, Math.max(-2, x[0]));
      x[1] = Math.min(2, Math.max(-2, x[1]));
    };
    const final = await iterate(new Float64Array([-1.2, 1]), rosenbrock, { project, initialStep: 1 }, 100, (before, after, reported) => {
      expect(after.x[0]).toBeLessThanOrEqual(0.5);
      expect(after.x[0]).toBeGreaterThanOrEqual(-2);
      expect(Math.abs(after.x[1])).toBeLessThanOrEqual(2);
      expect(wolfe(before, after).armijo).toBe(true);
      if (!reported.curvature) {
        expect(after.x[0]).toBe(0.5); // accepted without the curvature condition only at the bound
      }
    });
    expect(Math.abs(final.x[0] - 0.5)).toBeLessThan(1e-6);
    expect(Math.abs(final.x[1] - 0.25)).toBeLessThan(1e-6);
  });

  it("accepts a step on the Armijo condition alone when it reaches a bound while the free components still descend steeply", async () => {
    // f = −x₁ − 10x₂ with x₁ ≤ 0.02: the first direction is (0.01, 0.1); α = 1 still descends at full
    // slope, α = 4 holds x₁ at 0.02 while φ' = −1 stays below c2·φ'(0) = −0.909 (arithmetic).
    const linear: Objective = async (x) => ({ f: -x[0] - 10 * x[1], g: new Float64Array([-1, -10]) });
    const project = (x: Float64Array) => {
      x[0] = Math.min(0.02, x[0]);
    };
    const state = startLbfgs(new Float64Array([0, 0]), await linear(new Float64Array([0, 0])));
    const step = await lbfgsIteration(state, linear, { project, initialStep: 0.1 });
    expect(step.stopped).toBeUndefined();
    expect(step.wolfe).toEqual({ armijo: true, curvature: false });
    expect(step.stepLength).toBe(4);
    expect(Array.from(step.state.x)).toEqual([0.02, 0.4]);
    expect(wolfe(state, step.state).armijo).toBe(true);
  });

  it("stops with no-descent at a stationary point and refuses bad settings", async () => {
    const state = startLbfgs(new Float64Array([1, 1]), await rosenbrock(new Float64Array([1, 1])));
    const step = await lbfgsIteration(state, rosenbrock);
    expect(step.stopped).toBe("no-descent");
    expect(step.state.x).toEqual(state.x);
    await expect(lbfgsIteration(state, rosenbrock, { memory: 0 })).rejects.toThrow(/memory/);
    await expect(lbfgsIteration(state, rosenbrock, { c2: 1e-5 })).rejects.toThrow(/c2/);
  });
});
