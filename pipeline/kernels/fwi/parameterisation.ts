/**
 * How the inversion's optimiser vector x maps to an elastic model, and how a model gradient maps
 * back to a gradient in x, exactly (so the line search's Wolfe conditions test the true
 * directional derivative).
 *
 * For each inverted parameter p (Vs, Vp, ρ) on the cells of the model grid:
 *
 *   m_p(x) = clip_p( m0_p + D_p ⊙ S x_p )
 *
 * m0 is the model at the start of a stage, D_p a per-cell scale (the parameter's reference value,
 * times the pseudo-Hessian preconditioner of Shin et al. 2001 taken to the power ½, times tapers
 * and the mask of fixed cells, which is 0 there), S a symmetric Gaussian smoothing (so the model
 * update is smooth on the scale the data resolve; a change of variables, not a filter on the
 * gradient), and clip_p the bounds. Then by the chain rule
 *
 *   ∂J/∂x_p = S ( D_p ⊙ clip_p'(·) ⊙ ∂J/∂m_p ),
 *
 * using Sᵀ = S. The ratio bound Vp ≥ r·Vs (so λ = ρ(Vp² − 2Vs²) > 0 for r > √2) is kept by
 * raising Vp to r·Vs where needed; there Vp follows Vs and its gradient flows to Vs.
 *
 * Layout: every per-cell array is flat row-major `[z][x]` of the model grid (nz × nx); x holds the
 * inverted parameters one after another in the order of {@link INVERTED_PARAMETERS}.
 */
import type { ElasticModel } from "../../types";

/** Which parameters the inversion changes. */
export type InvertedSet = "vs" | "vs-vp" | "vs-vp-rho";

/** Parameters of each set, in the order they sit in x. */
export const INVERTED_PARAMETERS: Record<InvertedSet, ReadonlyArray<"vs" | "vp" | "rho">> = {
  vs: ["vs"],
  "vs-vp": ["vs", "vp"],
  "vs-vp-rho": ["vs", "vp", "rho"],
};

/** Bounds the model must stay inside (SI units). */
export interface ModelBounds {
  vsMin: number;
  vsMax: number;
  vpMin: number;
  vpMax: number;
  rhoMin: number;
  rhoMax: number;
  /** Smallest Vp/Vs; must exceed √2 so that λ > 0. */
  minVpVsRatio: number;
}

/** Everything needed to go between x and a model for one stage. Plain data (checkpointable). */
export interface Parameterisation {
  set: InvertedSet;
  nx: number;
  nz: number;
  spacingM: number;
  /** The stage's starting model. */
  start: ElasticModel;
  /** Per inverted parameter, per cell scale D (0 on fixed cells). */
  scale: Float64Array[];
  /** Standard deviation of the Gaussian smoothing S, in cells (0: none). */
  smoothingCells: number;
  bounds: ModelBounds;
}

/** Length of x for a parameterisation. */
export function vectorLength(p: Pick<Parameterisation, "set" | "nx" | "nz">): number {
  return INVERTED_PARAMETERS[p.set].length * p.nx * p.nz;
}

/**
 * Refuses a starting model outside the bounds, naming the bound to change and the worst cell.
 * Throws RangeError.
 */
export function checkModelInsideBounds(m: ElasticModel, b: ModelBounds): void {
  if (!(b.minVpVsRatio > Math.SQRT2)) {
    throw new RangeError(`minVpVsRatio must be above √2 ≈ 1.4142 so that λ = ρ(Vp² − 2Vs²) stays positive, got ${b.minVpVsRatio}`);
  }
  const check = (name: string, values: Float32Array, lo: number, hi: number, loName: string, hiName: string) => {
    let min = Infinity;
    let max = -Infinity;
    for (let i = 0; i < values.length; i++) {
      if (values[i] < min) min = values[i];
      if (values[i] > max) max = values[i];
    }
    if (min < lo) throw new RangeError(`the starting model has ${name} down to ${min.toFixed(1)}, below ${loName} = ${lo}; lower ${loName}`);
    if (max > hi) throw new RangeError(`the starting model has ${name} up to ${max.toFixed(1)}, above ${hiName} = ${hi}; raise ${hiName}`);
  };
  check("Vs", m.vs, b.vsMin, b.vsMax, "vsMin", "vsMax");
  check("Vp", m.vp, b.vpMin, b.vpMax, "vpMin", "vpMax");
  check("density", m.rho, b.rhoMin, b.rhoMax, "rhoMin", "rhoMax");
  let worst = Infinity;
  for (let i = 0; i < m.vs.length; i++) worst = Math.min(worst, m.vp[i] / m.vs[i]);
  if (worst < b.minVpVsRatio) {
    throw new RangeError(`the starting model has Vp/Vs down to ${worst.toFixed(3)}, below minVpVsRatio = ${b.minVpVsRatio}; lower minVpVsRatio (above √2) or fix the model`);
  }
}

/**
 * Symmetric separable Gaussian smoothing of a `[z][x]` field with standard deviation `sigmaCells`,
 * truncated at 3σ, zero outside the grid (which keeps the operator symmetric: Sᵀ = S). Weights sum
 * to 1 in the interior. Returns a new array; sigmaCells ≤ 0 copies.
 */
export function gaussianSmoothSymmetric(field: ArrayLike<number>, nx: number, nz: number, sigmaCells: number): Float64Array {
  if (field.length !== nx * nz) throw new RangeError(`field must hold nx·nz = ${nx * nz} values, got ${field.length}`);
  const out = Float64Array.from(field);
  if (!(sigmaCells > 0)) return out;
  const half = Math.max(1, Math.ceil(3 * sigmaCells));
  const w = new Float64Array(2 * half + 1);
  let sum = 0;
  for (let k = -half; k <= half; k++) {
    w[k + half] = Math.exp(-(k * k) / (2 * sigmaCells * sigmaCells));
    sum += w[k + half];
  }
  for (let k = 0; k < w.length; k++) w[k] /= sum;
  const tmp = new Float64Array(nx * nz);
  // Along x.
  for (let j = 0; j < nz; j++) {
    const row = j * nx;
    for (let i = 0; i < nx; i++) {
      let acc = 0;
      const lo = Math.max(0, i - half);
      const hi = Math.min(nx - 1, i + half);
      for (let q = lo; q <= hi; q++) acc += w[q - i + half] * out[row + q];
      tmp[row + i] = acc;
    }
  }
  // Along z.
  for (let j = 0; j < nz; j++) {
    const lo = Math.max(0, j - half);
    const hi = Math.min(nz - 1, j + half);
    for (let i = 0; i < nx; i++) {
      let acc = 0;
      for (let q = lo; q <= hi; q++) acc += w[q - j + half] * tmp[q * nx + i];
      out[j * nx + i] = acc;
    }
  }
  return out;
}

/** The model for x (see the module comment). */
export function modelFromVector(p: Parameterisation, x: Float64Array): ElasticModel {
  const names = INVERTED_PARAMETERS[p.set];
  const n = p.nx * p.nz;
  if (x.length !== names.length * n) throw new RangeError(`x must hold ${names.length * n} values, got ${x.length}`);
  const m: ElasticModel = { ...p.start, vp: Float32Array.from(p.start.vp), vs: Float32Array.from(p.start.vs), rho: Float32Array.from(p.start.rho) };
  const b = p.bounds;
  names.forEach((name, k) => {
    const sx = gaussianSmoothSymmetric(x.subarray(k * n, (k + 1) * n), p.nx, p.nz, p.smoothingCells);
    const d = p.scale[k];
    const start = p.start[name];
    const target = m[name];
    const lo = name === "vs" ? b.vsMin : name === "vp" ? b.vpMin : b.rhoMin;
    const hi = name === "vs" ? b.vsMax : name === "vp" ? b.vpMax : b.rhoMax;
    for (let i = 0; i < n; i++) target[i] = Math.min(hi, Math.max(lo, start[i] + d[i] * sx[i]));
  });
  enforceRatio(p, m, null);
  return m;
}

/**
 * Keeps Vp ≥ r·Vs. When Vp is inverted it is raised to r·Vs (and `raised` marks those cells);
 * when only Vs is inverted, Vs is lowered to Vp/r.
 */
function enforceRatio(p: Parameterisation, m: ElasticModel, raised: Uint8Array | null): void {
  const r = p.bounds.minVpVsRatio;
  const vpInverted = p.set !== "vs";
  for (let i = 0; i < m.vs.length; i++) {
    if (m.vp[i] >= r * m.vs[i]) continue;
    if (vpInverted) {
      m.vp[i] = r * m.vs[i];
      if (raised) raised[i] = 1;
    } else {
      m.vs[i] = m.vp[i] / r;
      if (raised) raised[i] = 1;
    }
  }
}

/**
 * ∂J/∂x from the model gradient ∂J/∂m at x (see the module comment). `gradient` holds ∂J/∂Vp,
 * ∂J/∂Vs, ∂J/∂ρ per cell, as the shot gradients return them.
 */
export function vectorGradient(
  p: Parameterisation,
  x: Float64Array,
  gradient: { vp: ArrayLike<number>; vs: ArrayLike<number>; rho: ArrayLike<number> },
): Float64Array {
  const names = INVERTED_PARAMETERS[p.set];
  const n = p.nx * p.nz;
  const b = p.bounds;
  // Recompute the unclipped values to know where each bound is active.
  const unclipped: Record<string, Float64Array> = {};
  names.forEach((name, k) => {
    const sx = gaussianSmoothSymmetric(x.subarray(k * n, (k + 1) * n), p.nx, p.nz, p.smoothingCells);
    const d = p.scale[k];
    const start = p.start[name];
    const u = new Float64Array(n);
    for (let i = 0; i < n; i++) u[i] = start[i] + d[i] * sx[i];
    unclipped[name] = u;
  });
  const m = modelFromVector(p, x);
  const gm: Record<"vs" | "vp" | "rho", Float64Array> = {
    vs: Float64Array.from(gradient.vs),
    vp: Float64Array.from(gradient.vp),
    rho: Float64Array.from(gradient.rho),
  };
  // The ratio bound: where it is active the dependent parameter follows the other.
  const r = b.minVpVsRatio;
  for (let i = 0; i < n; i++) {
    const vsBox = p.set === "vs" ? Math.min(b.vsMax, Math.max(b.vsMin, unclipped.vs[i])) : m.vs[i];
    const vpBox = p.set === "vs" ? m.vp[i] : Math.min(b.vpMax, Math.max(b.vpMin, unclipped.vp[i]));
    if (vpBox >= r * vsBox) continue;
    if (p.set === "vs") {
      // Vs = Vp/r there, independent of x.
      gm.vs[i] = 0;
    } else {
      // Vp = r·Vs: its gradient flows to Vs.
      gm.vs[i] += r * gm.vp[i];
      gm.vp[i] = 0;
    }
  }
  const g = new Float64Array(names.length * n);
  names.forEach((name, k) => {
    const lo = name === "vs" ? b.vsMin : name === "vp" ? b.vpMin : b.rhoMin;
    const hi = name === "vs" ? b.vsMax : name === "vp" ? b.vpMax : b.rhoMax;
    const u = unclipped[name];
    const d = p.scale[k];
    const inner = new Float64Array(n);
    for (let i = 0; i < n; i++) inner[i] = u[i] < lo || u[i] > hi ? 0 : d[i] * gm[name][i];
    g.set(gaussianSmoothSymmetric(inner, p.nx, p.nz, p.smoothingCells), k * n);
  });
  return g;
}

/** Inputs of {@link buildScale}. Per-cell arrays `[z][x]`. */
export interface ScaleOptions {
  /** Σ over shots of the forward wavefield energy per cell (the pseudo-Hessian diagonal), or null for none. */
  illumination: ArrayLike<number> | null;
  /** Added to the illumination as a fraction of its maximum, so dark cells are not blown up. */
  stabilisation: number;
  /** 1 where the model is held fixed. */
  fixed: Uint8Array;
  /** Per-cell weight in [0, 1] (tapers around sources and receivers). */
  taper: Float64Array;
}

/**
 * The per-cell scale D of each inverted parameter: its reference value (the mean over the free
 * cells of the starting model, so x is a relative change), times the preconditioner
 * (1 / (H + ε·max H))^½ normalised to a largest value of 1 (Shin, Jang & Min 2001, Geophys.
 * Prosp. 49: the diagonal of the pseudo-Hessian; the square root because D enters the update twice,
 * m − m0 = D S (−α S D g)), times the taper, and 0 on fixed cells.
 */
export function buildScale(set: InvertedSet, start: ElasticModel, o: ScaleOptions): Float64Array[] {
  const n = start.nx * start.nz;
  for (const [name, a] of [["fixed", o.fixed], ["taper", o.taper]] as const) {
    if (a.length !== n) throw new RangeError(`${name} must hold nx·nz = ${n} values, got ${a.length}`);
  }
  if (o.illumination && o.illumination.length !== n) throw new RangeError(`illumination must hold ${n} values, got ${o.illumination.length}`);
  if (!(o.stabilisation > 0)) throw new RangeError(`stabilisation must be > 0, got ${o.stabilisation}`);
  const pre = new Float64Array(n).fill(1);
  if (o.illumination) {
    let max = 0;
    for (let i = 0; i < n; i++) max = Math.max(max, o.illumination[i]);
    if (max > 0) {
      let top = 0;
      for (let i = 0; i < n; i++) {
        pre[i] = 1 / (o.illumination[i] + o.stabilisation * max);
        if (!o.fixed[i]) top = Math.max(top, pre[i]);
      }
      for (let i = 0; i < n; i++) pre[i] = top > 0 ? Math.sqrt(pre[i] / top) : 0;
    }
  }
  return INVERTED_PARAMETERS[set].map((name) => {
    const values = start[name];
    let sum = 0;
    let count = 0;
    for (let i = 0; i < n; i++) {
      if (o.fixed[i]) continue;
      sum += values[i];
      count++;
    }
    const ref = count > 0 ? sum / count : 0;
    const d = new Float64Array(n);
    for (let i = 0; i < n; i++) d[i] = o.fixed[i] ? 0 : ref * pre[i] * o.taper[i];
    return d;
  });
}

/**
 * Weights in [0, 1] that fade the update out around points (sources, receivers): 0 at a point,
 * rising as a cosine ramp to 1 at `radiusM`; the product over all points. Common practice: the
 * gradient is singular next to the sources and receivers.
 */
export function pointTaper(model: Pick<ElasticModel, "nx" | "nz" | "spacingM" | "originX" | "originZ">, points: Array<{ x: number; z: number }>, radiusM: number): Float64Array {
  const { nx, nz, spacingM: h, originX, originZ } = model;
  const out = new Float64Array(nx * nz).fill(1);
  if (!(radiusM > 0)) return out;
  const reach = Math.ceil(radiusM / h) + 1;
  for (const pt of points) {
    const ci = Math.round((pt.x - originX) / h);
    const cj = Math.round((pt.z - originZ) / h);
    for (let j = Math.max(0, cj - reach); j <= Math.min(nz - 1, cj + reach); j++) {
      for (let i = Math.max(0, ci - reach); i <= Math.min(nx - 1, ci + reach); i++) {
        const r = Math.hypot(originX + i * h - pt.x, originZ + j * h - pt.z);
        if (r >= radiusM) continue;
        out[j * nx + i] *= 0.5 - 0.5 * Math.cos((Math.PI * r) / radiusM);
      }
    }
  }
  return out;
}
