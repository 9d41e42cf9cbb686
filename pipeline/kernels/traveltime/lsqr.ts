/**
 * Sparse matrices in compressed-row form and LSQR (Paige & Saunders 1982, "LSQR: An algorithm for
 * sparse linear equations and sparse least squares", ACM TOMS 8, 43–71): the Golub–Kahan
 * bidiagonalisation with the QR update and the damped form (one extra plane rotation per step),
 * solving
 *
 *   min ‖A·x − b‖² + damp²·‖x‖².
 *
 * Stopping rules S1 and S2 of the paper: ‖r‖ ≤ btol·‖b‖ + atol·‖A‖·‖x‖, or
 * ‖Aᵀr‖ / (‖A‖·‖r‖) ≤ atol, with the paper's running estimates of ‖A‖, ‖r‖, ‖Aᵀr‖.
 */

/** A sparse matrix in compressed-row form. Row i holds entries rowStart[i] … rowStart[i+1]−1. */
export interface SparseMatrix {
  rows: number;
  cols: number;
  rowStart: Int32Array;
  colIndex: Int32Array;
  values: Float64Array;
}

/** Builds a {@link SparseMatrix} row by row. */
export class SparseRowBuilder {
  private readonly starts: number[] = [0];
  private cols: number[] = [];
  private vals: number[] = [];

  constructor(readonly columnCount: number) {
    if (!Number.isInteger(columnCount) || columnCount < 1) throw new RangeError(`columnCount must be a positive integer, got ${columnCount}`);
  }

  /** Appends one row given as parallel arrays of column indices and values. */
  addRow(columns: ArrayLike<number>, values: ArrayLike<number>): void {
    if (columns.length !== values.length) throw new RangeError(`columns (${columns.length}) and values (${values.length}) must have the same length`);
    for (let i = 0; i < columns.length; i++) {
      const c = columns[i];
      if (!Number.isInteger(c) || c < 0 || c >= this.columnCount) throw new RangeError(`column index ${c} is outside 0 … ${this.columnCount - 1}`);
      this.cols.push(c);
      this.vals.push(values[i]);
    }
    this.starts.push(this.cols.length);
  }

  get rowCount(): number {
    return this.starts.length - 1;
  }

  build(): SparseMatrix {
    return {
      rows: this.starts.length - 1,
      cols: this.columnCount,
      rowStart: Int32Array.from(this.starts),
      colIndex: Int32Array.from(this.cols),
      values: Float64Array.from(this.vals),
    };
  }
}

/** y ← A·x. */
export function sparseMultiply(a: SparseMatrix, x: Float64Array, y: Float64Array): Float64Array {
  for (let i = 0; i < a.rows; i++) {
    let s = 0;
    for (let p = a.rowStart[i]; p < a.rowStart[i + 1]; p++) s += a.values[p] * x[a.colIndex[p]];
    y[i] = s;
  }
  return y;
}

/** x ← Aᵀ·y. */
export function sparseMultiplyTranspose(a: SparseMatrix, y: Float64Array, x: Float64Array): Float64Array {
  x.fill(0);
  for (let i = 0; i < a.rows; i++) {
    const yi = y[i];
    if (yi === 0) continue;
    for (let p = a.rowStart[i]; p < a.rowStart[i + 1]; p++) x[a.colIndex[p]] += a.values[p] * yi;
  }
  return x;
}

/** Settings of {@link lsqr}. */
export interface LsqrOptions {
  /** Damping: adds damp²·‖x‖² to the objective. @default 0 */
  damp?: number;
  /** Relative accuracy of A (stopping rules S1, S2). @default 1e-10 */
  atol?: number;
  /** Relative accuracy of b (stopping rule S1). @default 1e-10 */
  btol?: number;
  /** Iteration limit. @default 4·cols */
  maxIterations?: number;
}

/** Outcome of {@link lsqr}. */
export interface LsqrResult {
  x: Float64Array;
  iterations: number;
  /** Why it stopped: 0 b = 0, 1 residual small (S1), 2 least-squares optimal (S2), 3 iteration limit. */
  stop: 0 | 1 | 2 | 3;
  /** Estimate of ‖[b; 0] − [A; damp·I]·x‖. */
  residualNorm: number;
}

/** Solves min ‖A·x − b‖² + damp²‖x‖² by LSQR (Paige & Saunders 1982). */
export function lsqr(a: SparseMatrix, b: Float64Array, options: LsqrOptions = {}): LsqrResult {
  const { rows: m, cols: n } = a;
  if (b.length !== m) throw new RangeError(`b must have ${m} values (the matrix's rows), got ${b.length}`);
  const damp = options.damp ?? 0;
  if (!(damp >= 0) || !Number.isFinite(damp)) throw new RangeError(`damp must be ≥ 0, got ${damp}`);
  const atol = options.atol ?? 1e-10;
  const btol = options.btol ?? 1e-10;
  const maxIterations = options.maxIterations ?? 4 * n;
  if (!Number.isInteger(maxIterations) || maxIterations < 1) throw new RangeError(`maxIterations must be a positive integer, got ${maxIterations}`);

  const x = new Float64Array(n);
  const u = Float64Array.from(b);
  const v = new Float64Array(n);
  const w = new Float64Array(n);
  const tmpM = new Float64Array(m);
  const tmpN = new Float64Array(n);
  const norm = (z: Float64Array) => {
    let s = 0;
    for (let i = 0; i < z.length; i++) s += z[i] * z[i];
    return Math.sqrt(s);
  };
  let beta = norm(u);
  const bnorm = beta;
  if (beta === 0) return { x, iterations: 0, stop: 0, residualNorm: 0 };
  for (let i = 0; i < m; i++) u[i] /= beta;
  sparseMultiplyTranspose(a, u, v);
  let alpha = norm(v);
  if (alpha === 0) return { x, iterations: 0, stop: 2, residualNorm: beta };
  for (let j = 0; j < n; j++) v[j] /= alpha;
  w.set(v);
  let phibar = beta;
  let rhobar = alpha;
  let anorm2 = 0;
  let xnorm = 0;
  let iterations = 0;
  let stop: LsqrResult["stop"] = 3;
  let residualNorm = beta;
  let dampedResidual2 = 0;
  while (iterations < maxIterations) {
    iterations++;
    // Bidiagonalisation: beta·u = A·v − alpha·u; alpha·v = Aᵀ·u − beta·v.
    sparseMultiply(a, v, tmpM);
    for (let i = 0; i < m; i++) u[i] = tmpM[i] - alpha * u[i];
    beta = norm(u);
    anorm2 += alpha * alpha + beta * beta + damp * damp;
    if (beta > 0) {
      for (let i = 0; i < m; i++) u[i] /= beta;
      sparseMultiplyTranspose(a, u, tmpN);
      for (let j = 0; j < n; j++) v[j] = tmpN[j] - beta * v[j];
      alpha = norm(v);
      if (alpha > 0) for (let j = 0; j < n; j++) v[j] /= alpha;
    }
    // Damping rotation, then the plane rotation that eliminates beta.
    const rhobar1 = Math.hypot(rhobar, damp);
    const cs1 = rhobar / rhobar1;
    const sn1 = damp / rhobar1;
    const psi = sn1 * phibar;
    phibar = cs1 * phibar;
    const rho = Math.hypot(rhobar1, beta);
    const c = rhobar1 / rho;
    const s = beta / rho;
    const theta = s * alpha;
    rhobar = -c * alpha;
    const phi = c * phibar;
    phibar = s * phibar;
    const t1 = phi / rho;
    const t2 = -theta / rho;
    let xx = 0;
    for (let j = 0; j < n; j++) {
      x[j] += t1 * w[j];
      w[j] = v[j] + t2 * w[j];
      xx += x[j] * x[j];
    }
    xnorm = Math.sqrt(xx);
    // Running estimates: ‖r̄‖² = phibar² + Σψ² (the damping part); ‖Aᵀr̄‖ = |phibar·alpha·c|.
    dampedResidual2 += psi * psi;
    residualNorm = Math.sqrt(phibar * phibar + dampedResidual2);
    const anorm = Math.sqrt(anorm2);
    const arnorm = Math.abs(phibar * alpha * c);
    if (residualNorm <= btol * bnorm + atol * anorm * xnorm) {
      stop = 1;
      break;
    }
    if (arnorm <= atol * anorm * residualNorm || arnorm === 0) {
      stop = 2;
      break;
    }
  }
  return { x, iterations, stop, residualNorm };
}
