/**
 * Conditioning of full-waveform-inversion gradients on the model grid (flat row-major `[z][x]`,
 * square cells of `spacingM`, column ix at originX + ix·spacingM, row iz at depth originZ + iz·spacingM):
 * - diagonal pseudo-Hessian preconditioning g / (I + ε·max I), I the illumination (the zero-lag
 *   energy of the forward wavefield summed over shots; Shin, Jang & Min 2001, Geophysical
 *   Prospecting 49(5), 592–606, the pseudo-Hessian as the diagonal of the virtual-source correlation); ε keeps
 *   the division finite where nothing is illuminated;
 * - cosine tapers around sources and receivers, where the gradient holds the near-field spikes of
 *   the injection points (common practice);
 * - separable 2D Gaussian smoothing with a length in metres;
 * - masks of fixed cells (the gradient there is zeroed).
 */
import { assertCount, assertFinite } from "../taper";

/** Grid of a model: what the conditioning needs to place points in metres. */
export interface GridGeometry {
  nx: number;
  nz: number;
  /** Cell size, m (square cells). */
  spacingM: number;
  /** Position of column 0 along the profile, m. */
  originX: number;
  /** Depth of row 0, m. */
  originZ: number;
}

type Field = Float32Array | Float64Array;

function assertGrid(grid: GridGeometry): number {
  assertCount("nx", grid.nx);
  assertCount("nz", grid.nz);
  if (!(grid.spacingM > 0 && Number.isFinite(grid.spacingM))) throw new RangeError(`spacingM must be a positive number, got ${grid.spacingM}`);
  assertFinite("originX", grid.originX);
  assertFinite("originZ", grid.originZ);
  return grid.nx * grid.nz;
}

function assertLength(name: string, field: ArrayLike<number>, n: number): void {
  if (field.length !== n) throw new RangeError(`${name} must hold ${n} values, got ${field.length}`);
}

/**
 * Diagonal pseudo-Hessian preconditioning: out = g / (illumination + epsilon · max illumination)
 * (Shin et al. 2001). Returns `out` (new Float64Array by default).
 * @param epsilon stabilisation as a fraction of the largest illumination, > 0
 */
export function pseudoHessianPrecondition(gradient: Field, illumination: Field, epsilon: number, out: Float64Array = new Float64Array(gradient.length)): Float64Array {
  assertLength("illumination", illumination, gradient.length);
  assertLength("out", out, gradient.length);
  if (!(epsilon > 0 && Number.isFinite(epsilon))) throw new RangeError(`epsilon must be a positive number, got ${epsilon}`);
  let peak = 0;
  for (let i = 0; i < illumination.length; i++) {
    const v = illumination[i];
    if (!(v >= 0)) throw new RangeError(`illumination must be ≥ 0 everywhere, got ${v} at index ${i}`);
    if (v > peak) peak = v;
  }
  if (!(peak > 0)) throw new RangeError("illumination is zero everywhere: nothing to precondition with");
  const floor = epsilon * peak;
  for (let i = 0; i < gradient.length; i++) out[i] = gradient[i] / (illumination[i] + floor);
  return out;
}

/** A point of the acquisition (source or receiver), m. */
export interface TaperPoint {
  /** Position along the profile, m. */
  xM: number;
  /** Depth, m. */
  zM: number;
}

/**
 * Weights `[z][x]` that taper the gradient around points: the product over points of
 * τ(r) = ½ (1 − cos(π r / R)) for r < R and 1 beyond, r the distance from the point to the cell
 * centre: 0 at a point, ½ at R/2, 1 at and beyond R (a raised-cosine ramp, common practice).
 * @param radiusM R, m (0 gives all ones)
 */
export function pointTaperWeights(grid: GridGeometry, points: readonly TaperPoint[], radiusM: number, out?: Float64Array): Float64Array {
  const n = assertGrid(grid);
  if (!(radiusM >= 0 && Number.isFinite(radiusM))) throw new RangeError(`radiusM must be a number ≥ 0, got ${radiusM}`);
  const w = out ?? new Float64Array(n);
  assertLength("out", w, n);
  w.fill(1);
  if (radiusM === 0) return w;
  const { nx, nz, spacingM: h, originX, originZ } = grid;
  for (const p of points) {
    assertFinite("point xM", p.xM);
    assertFinite("point zM", p.zM);
    // Only cells within R of the point are touched.
    const ix0 = Math.max(0, Math.floor((p.xM - radiusM - originX) / h));
    const ix1 = Math.min(nx - 1, Math.ceil((p.xM + radiusM - originX) / h));
    const iz0 = Math.max(0, Math.floor((p.zM - radiusM - originZ) / h));
    const iz1 = Math.min(nz - 1, Math.ceil((p.zM + radiusM - originZ) / h));
    for (let iz = iz0; iz <= iz1; iz++) {
      const dz = originZ + iz * h - p.zM;
      for (let ix = ix0; ix <= ix1; ix++) {
        const dx = originX + ix * h - p.xM;
        const r = Math.hypot(dx, dz);
        if (r < radiusM) w[iz * nx + ix] *= 0.5 * (1 - Math.cos((Math.PI * r) / radiusM));
      }
    }
  }
  return w;
}

/** Multiplies `field` by `weights` element by element, in place. */
export function multiplyInPlace(field: Field, weights: ArrayLike<number>): void {
  assertLength("weights", weights, field.length);
  for (let i = 0; i < field.length; i++) field[i] *= weights[i];
}

/** Zeroes `gradient` where `fixed` is 1 (cells kept at their starting values), in place. */
export function zeroFixedCells(gradient: Field, fixed: Uint8Array): void {
  assertLength("fixed", fixed, gradient.length);
  for (let i = 0; i < gradient.length; i++) if (fixed[i]) gradient[i] = 0;
}

/** Gaussian kernels are cut at GAUSSIAN_HALF_WIDTH standard deviations (the tail beyond holds 6e-7 of the weight). */
export const GAUSSIAN_HALF_WIDTH = 5;

/**
 * Separable 2D Gaussian smoothing of a field `[z][x]`: exp(−r²/(2σ²)) with σ = `lengthM`, cut at
 * {@link GAUSSIAN_HALF_WIDTH}·σ, one pass along x then one along z. At the edges each output is
 * divided by the sum of the weights that fall inside the grid, so a constant field stays constant
 * (the total is not kept near edges). Returns `out` (new Float64Array by default); `field` is only
 * written when it is passed as `out` (smoothing in place). Allocates the kernel and one work field.
 * @param lengthM standard deviation σ of the Gaussian, m (0 copies the field)
 */
export function gaussianSmooth(field: Field, grid: Pick<GridGeometry, "nx" | "nz" | "spacingM">, lengthM: number, out: Float64Array = new Float64Array(field.length)): Float64Array {
  const { nx, nz, spacingM } = grid;
  assertCount("nx", nx);
  assertCount("nz", nz);
  if (!(spacingM > 0)) throw new RangeError(`spacingM must be a positive number, got ${spacingM}`);
  assertLength("field", field, nx * nz);
  assertLength("out", out, nx * nz);
  if (!(lengthM >= 0 && Number.isFinite(lengthM))) throw new RangeError(`lengthM must be a number ≥ 0, got ${lengthM}`);
  const sigma = lengthM / spacingM;
  const half = Math.ceil(GAUSSIAN_HALF_WIDTH * sigma);
  if (half === 0) {
    for (let i = 0; i < field.length; i++) out[i] = field[i];
    return out;
  }
  const kernel = new Float64Array(2 * half + 1);
  for (let j = -half; j <= half; j++) kernel[j + half] = Math.exp(-(j * j) / (2 * sigma * sigma));
  // Along x, row by row, into a work field.
  const work = new Float64Array(nx * nz);
  for (let iz = 0; iz < nz; iz++) {
    const row = iz * nx;
    for (let ix = 0; ix < nx; ix++) {
      const j0 = Math.max(-half, -ix);
      const j1 = Math.min(half, nx - 1 - ix);
      let sum = 0;
      let norm = 0;
      for (let j = j0; j <= j1; j++) {
        sum += kernel[j + half] * field[row + ix + j];
        norm += kernel[j + half];
      }
      work[row + ix] = sum / norm;
    }
  }
  // Along z, a whole row at a time (contiguous memory).
  for (let iz = 0; iz < nz; iz++) {
    const j0 = Math.max(-half, -iz);
    const j1 = Math.min(half, nz - 1 - iz);
    let norm = 0;
    for (let j = j0; j <= j1; j++) norm += kernel[j + half];
    const row = iz * nx;
    out.fill(0, row, row + nx);
    for (let j = j0; j <= j1; j++) {
      const w = kernel[j + half] / norm;
      const src = (iz + j) * nx;
      for (let ix = 0; ix < nx; ix++) out[row + ix] += w * work[src + ix];
    }
  }
  return out;
}
