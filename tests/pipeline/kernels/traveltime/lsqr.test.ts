import { describe, expect, it } from "vitest";
import { lsqr, SparseRowBuilder, sparseMultiply, sparseMultiplyTranspose } from "../../../../pipeline/kernels/traveltime/lsqr";
import { seededRandom } from "../../../helpers/random";

/**
 * Solves (AᵀA + damp²·I)·x = Aᵀb directly: the normal equations of damped least squares
 * (Golub & Van Loan, Matrix Computations; section numbers from memory: §5.3), by Cholesky factorisation of the symmetric
 * positive definite matrix (§4.2). Written out here as the independent reference.
 */
function normalEquations(a: number[][], b: number[], damp: number): number[] {
  const n = a[0].length;
  const N = Array.from({ length: n }, (_, i) => Array.from({ length: n }, (_, j) => a.reduce((s, row) => s + row[i] * row[j], 0) + (i === j ? damp * damp : 0)));
  const rhs = Array.from({ length: n }, (_, i) => a.reduce((s, row, k) => s + row[i] * b[k], 0));
  const L = Array.from({ length: n }, () => new Array<number>(n).fill(0));
  for (let j = 0; j < n; j++) {
    let d = N[j][j];
    for (let k = 0; k < j; k++) d -= L[j][k] ** 2;
    L[j][j] = Math.sqrt(d);
    for (let i = j + 1; i < n; i++) {
      let s = N[i][j];
      for (let k = 0; k < j; k++) s -= L[i][k] * L[j][k];
      L[i][j] = s / L[j][j];
    }
  }
  const y = new Array<number>(n).fill(0);
  for (let i = 0; i < n; i++) {
    let s = rhs[i];
    for (let k = 0; k < i; k++) s -= L[i][k] * y[k];
    y[i] = s / L[i][i];
  }
  const x = new Array<number>(n).fill(0);
  for (let i = n - 1; i >= 0; i--) {
    let s = y[i];
    for (let k = i + 1; k < n; k++) s -= L[k][i] * x[k];
    x[i] = s / L[i][i];
  }
  return x;
}

function randomProblem(seed: number, m: number, n: number, density = 1) {
  const rnd = seededRandom(seed);
  const dense: number[][] = [];
  const builder = new SparseRowBuilder(n);
  for (let i = 0; i < m; i++) {
    const row = new Array<number>(n).fill(0);
    const cols: number[] = [];
    const vals: number[] = [];
    for (let j = 0; j < n; j++) {
      if (density < 1 && rnd.uniform() > density) continue;
      row[j] = rnd.gaussian();
      cols.push(j);
      vals.push(row[j]);
    }
    dense.push(row);
    builder.addRow(cols, vals);
  }
  const b = Array.from({ length: m }, () => rnd.gaussian());
  return { dense, matrix: builder.build(), b };
}

describe("LSQR (Paige & Saunders 1982)", () => {
  it.each([0, 0.3, 2])("solves a small dense least-squares problem as the normal equations do (damp %s)", (damp) => {
    const { dense, matrix, b } = randomProblem(17, 30, 12);
    const reference = normalEquations(dense, b, damp);
    const result = lsqr(matrix, Float64Array.from(b), { damp });
    // In exact arithmetic LSQR ends within n = 12 steps; the tolerance allows rounding of a
    // well-conditioned 30 × 12 problem (condition about 4 for Gaussian entries).
    expect(result.iterations).toBeLessThanOrEqual(16);
    const scale = Math.max(...reference.map(Math.abs));
    for (let j = 0; j < 12; j++) expect(Math.abs(result.x[j] - reference[j]) / scale).toBeLessThan(1e-9);
    // The paper's running residual estimate is the true ‖[b; 0] − [A; damp·I]x‖.
    const ax = sparseMultiply(matrix, result.x, new Float64Array(30));
    let r2 = 0;
    for (let i = 0; i < 30; i++) r2 += (b[i] - ax[i]) ** 2;
    for (let j = 0; j < 12; j++) r2 += (damp * result.x[j]) ** 2;
    expect(result.residualNorm).toBeCloseTo(Math.sqrt(r2), 8);
  });

  it("solves a sparse, consistent, overdetermined system to its exact solution", () => {
    // 200 unknowns, 400 rows of 5 % density: full column rank with near certainty; b = A·x_true.
    const { matrix } = randomProblem(5, 400, 200, 0.05);
    const rnd = seededRandom(6);
    const xTrue = Float64Array.from({ length: 200 }, () => rnd.gaussian());
    const b = sparseMultiply(matrix, xTrue, new Float64Array(400));
    const result = lsqr(matrix, b, { maxIterations: 2000 });
    expect(result.stop).toBe(1);
    let worst = 0;
    for (let j = 0; j < 200; j++) worst = Math.max(worst, Math.abs(result.x[j] - xTrue[j]));
    expect(worst).toBeLessThan(1e-6);
  });

  it("multiplies by A and Aᵀ consistently: yᵀ(Ax) = (Aᵀy)ᵀx (the adjoint test)", () => {
    const { matrix } = randomProblem(9, 50, 40, 0.2);
    const rnd = seededRandom(10);
    const x = Float64Array.from({ length: 40 }, () => rnd.gaussian());
    const y = Float64Array.from({ length: 50 }, () => rnd.gaussian());
    const ax = sparseMultiply(matrix, x, new Float64Array(50));
    const aty = sparseMultiplyTranspose(matrix, y, new Float64Array(40));
    const left = ax.reduce((s, v, i) => s + v * y[i], 0);
    const right = aty.reduce((s, v, j) => s + v * x[j], 0);
    expect(Math.abs(left - right)).toBeLessThan(1e-12 * Math.abs(left) + 1e-12);
  });

  it("returns zero for b = 0 and refuses bad arguments", () => {
    const { matrix } = randomProblem(1, 6, 3);
    expect(lsqr(matrix, new Float64Array(6)).x).toEqual(new Float64Array(3));
    expect(() => lsqr(matrix, new Float64Array(5))).toThrow(/b must have 6/);
    expect(() => lsqr(matrix, new Float64Array(6), { damp: -1 })).toThrow(/damp/);
    expect(() => new SparseRowBuilder(3).addRow([3], [1])).toThrow(/column index 3/);
  });
});
