import { describe, expect, it } from "vitest";
import { cubicStep, strongWolfeLineSearch, type LineSearchPoint } from "../../../../pipeline/kernels/optim/line-search";

describe("strong Wolfe line search (Nocedal & Wright 2006, algorithms 3.5 and 3.6)", () => {
  it("cubic interpolation is exact for a cubic: φ = α³ − 3α has its minimum at α = 1 (calculus)", () => {
    const phi = (a: number) => a ** 3 - 3 * a;
    const dphi = (a: number) => 3 * a * a - 3;
    expect(cubicStep({ alpha: 0, phi: phi(0), dphi: dphi(0) }, { alpha: 2, phi: phi(2), dphi: dphi(2) })).toBeCloseTo(1, 12);
    expect(cubicStep({ alpha: 2, phi: phi(2), dphi: dphi(2) }, { alpha: 0, phi: phi(0), dphi: dphi(0) })).toBeCloseTo(1, 12);
  });

  for (const alpha1 of [1e-3, 1, 50]) {
    it(`accepts a point satisfying both conditions on φ(α) = (α − 3)² + sin 3α from α₁ = ${alpha1}`, async () => {
      const phi = (a: number) => (a - 3) ** 2 + Math.sin(3 * a);
      const dphi = (a: number) => 2 * (a - 3) + 3 * Math.cos(3 * a);
      const evaluate = async (alpha: number): Promise<LineSearchPoint<null>> => ({ alpha, phi: phi(alpha), dphi: dphi(alpha), linear: alpha * dphi(0), atBound: false, payload: null });
      const r = await strongWolfeLineSearch(phi(0), dphi(0), evaluate, alpha1, { maxEvaluations: 20 });
      expect(r.point).not.toBeNull();
      const a = r.point!.alpha;
      // N&W eq. 3.7a and 3.7b with c1 = 1e-4, c2 = 0.9.
      expect(phi(a)).toBeLessThanOrEqual(phi(0) + 1e-4 * a * dphi(0));
      expect(Math.abs(dphi(a))).toBeLessThanOrEqual(0.9 * Math.abs(dphi(0)));
      expect(r).toMatchObject({ armijo: true, curvature: true });
      expect(r.evaluations).toBeLessThanOrEqual(20);
    });
  }

  it("treats a non-finite value as failing sufficient decrease and backs off", async () => {
    const evaluate = async (alpha: number): Promise<LineSearchPoint<null>> => ({
      alpha,
      phi: alpha > 2 ? Number.NaN : (alpha - 1) ** 2,
      dphi: 2 * (alpha - 1),
      linear: -2 * alpha,
      atBound: false,
      payload: null,
    });
    const r = await strongWolfeLineSearch(1, -2, evaluate, 10);
    expect(r.point?.alpha).toBeGreaterThan(0);
    expect(r.point!.alpha).toBeLessThanOrEqual(2);
  });

  it("reports failure after maxEvaluations without accepting a point", async () => {
    // φ rises along a direction claimed to descend: no α satisfies the Armijo condition.
    const evaluate = async (alpha: number): Promise<LineSearchPoint<null>> => ({ alpha, phi: 1 + alpha, dphi: 1, linear: -alpha, atBound: false, payload: null });
    const r = await strongWolfeLineSearch(1, -1, evaluate, 1, { maxEvaluations: 5 });
    expect(r.point).toBeNull();
    expect(r.evaluations).toBe(5);
  });
});
