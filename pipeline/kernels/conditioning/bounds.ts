/**
 * Bounds of the elastic model kept by projection during the inversion: Vs, Vp and ρ inside set
 * ranges and Vp/Vs at or above a minimum ratio r ≥ √2, so that λ = ρ(Vp² − 2Vs²) ≥ 0 (a stable,
 * physical isotropic solid; Poisson's ratio ν = (r² − 2)/(2(r² − 1)) ≥ 0 at the minimum ratio).
 *
 * Projection (a map onto the feasible set that leaves feasible points unchanged and is idempotent;
 * not the Euclidean nearest point where the ratio bound couples Vs and Vp):
 * 1. Vs is clamped to [vsMinMps, vsMaxMps]; Vp (when inverted) to [vpMinMps, vpMaxMps]; ρ (when
 *    inverted) to [rhoMinKgm3, rhoMaxKgm3].
 * 2. Ratio: when Vp is inverted, Vp < r·Vs raises Vp to r·Vs, and if that passes vpMaxMps, Vp is
 *    set to vpMaxMps and Vs lowered to vpMaxMps / r. When only Vs is inverted (Vp fixed), Vs is
 *    lowered to Vp / r.
 * 3. Fixed cells (mask) are reset to their starting values.
 * {@link checkModelBounds} makes every step of this feasible: it refuses bounds that leave no room
 * and a starting model that violates them, saying which bound to change.
 */
import { assertModelFields, parameterNames, type InvertedParameters, type ModelFields, type ReferenceValues } from "./model-vector";

/** Bounds of the inverted model. */
export interface ModelBounds {
  vsMinMps: number;
  vsMaxMps: number;
  vpMinMps: number;
  vpMaxMps: number;
  rhoMinKgm3: number;
  rhoMaxKgm3: number;
  /** Smallest Vp/Vs, at least √2. */
  minVpVsRatio: number;
}

/** Grid placement for messages (an ElasticModel fits); optional. */
export interface Placement {
  spacingM?: number;
  originX?: number;
  originZ?: number;
}

/** Refuses inconsistent bounds: each range ordered and positive, minVpVsRatio ≥ √2, room for Vp above r·vsMinMps. */
export function checkBoundsConsistent(b: ModelBounds): void {
  const pairs: [string, number, string, number][] = [
    ["vsMinMps", b.vsMinMps, "vsMaxMps", b.vsMaxMps],
    ["vpMinMps", b.vpMinMps, "vpMaxMps", b.vpMaxMps],
    ["rhoMinKgm3", b.rhoMinKgm3, "rhoMaxKgm3", b.rhoMaxKgm3],
  ];
  for (const [loName, lo, hiName, hi] of pairs) {
    if (!(lo > 0 && Number.isFinite(lo))) throw new RangeError(`${loName} must be a positive number, got ${lo}`);
    if (!(hi >= lo && Number.isFinite(hi))) throw new RangeError(`${hiName} must be a number ≥ ${loName} (${lo}), got ${hi}`);
  }
  if (!(b.minVpVsRatio >= Math.SQRT2 && Number.isFinite(b.minVpVsRatio))) {
    throw new RangeError(`minVpVsRatio must be at least √2 ≈ 1.4142 so that λ = ρ(Vp² − 2Vs²) ≥ 0, got ${b.minVpVsRatio}`);
  }
  if (b.vpMaxMps < b.minVpVsRatio * b.vsMinMps) {
    throw new RangeError(
      `vpMaxMps (${b.vpMaxMps}) is below minVpVsRatio × vsMinMps = ${b.minVpVsRatio * b.vsMinMps}: no model satisfies both; raise vpMaxMps or lower vsMinMps or minVpVsRatio`,
    );
  }
}

function where(model: ModelFields & Placement, i: number): string {
  const ix = i % model.nx;
  const iz = Math.floor(i / model.nx);
  if (model.spacingM === undefined) return `cell ix ${ix}, iz ${iz}`;
  const x = (model.originX ?? 0) + ix * model.spacingM;
  const z = (model.originZ ?? 0) + iz * model.spacingM;
  return `x = ${x} m, z = ${z} m (cell ix ${ix}, iz ${iz})`;
}

/**
 * Refuses bounds the starting model violates (for the parameters the set inverts, and the Vp/Vs
 * ratio always), with a RangeError that names the first offending cell, how many cells offend, and
 * which bound to change to what.
 */
export function checkModelBounds(model: ModelFields & Placement, set: InvertedParameters, b: ModelBounds): void {
  checkBoundsConsistent(b);
  const n = assertModelFields(model);
  const names = parameterNames(set);
  const fmt = (v: number) => Number(v.toPrecision(6));
  const checks: { name: "vs" | "vp" | "rho"; label: string; unit: string; lo: number; hi: number; loName: string; hiName: string }[] = [];
  if (names.includes("vs")) checks.push({ name: "vs", label: "Vs", unit: "m/s", lo: b.vsMinMps, hi: b.vsMaxMps, loName: "vsMinMps", hiName: "vsMaxMps" });
  if (names.includes("vp")) checks.push({ name: "vp", label: "Vp", unit: "m/s", lo: b.vpMinMps, hi: b.vpMaxMps, loName: "vpMinMps", hiName: "vpMaxMps" });
  if (names.includes("rho")) checks.push({ name: "rho", label: "density", unit: "kg/m³", lo: b.rhoMinKgm3, hi: b.rhoMaxKgm3, loName: "rhoMinKgm3", hiName: "rhoMaxKgm3" });
  for (const c of checks) {
    const field = model[c.name];
    let min = Infinity;
    let max = -Infinity;
    let iMin = 0;
    let iMax = 0;
    let below = 0;
    let above = 0;
    for (let i = 0; i < n; i++) {
      const v = field[i];
      if (v < min) [min, iMin] = [v, i];
      if (v > max) [max, iMax] = [v, i];
      if (v < c.lo) below++;
      if (v > c.hi) above++;
    }
    if (below > 0) throw new RangeError(`the starting model has ${c.label} = ${fmt(min)} ${c.unit} at ${where(model, iMin)}, below ${c.loName} = ${c.lo} (${below} cells below): lower ${c.loName} to ${fmt(min)} or less`);
    if (above > 0) throw new RangeError(`the starting model has ${c.label} = ${fmt(max)} ${c.unit} at ${where(model, iMax)}, above ${c.hiName} = ${c.hi} (${above} cells above): raise ${c.hiName} to ${fmt(max)} or more`);
  }
  let worst = Infinity;
  let iWorst = 0;
  let count = 0;
  for (let i = 0; i < n; i++) {
    const ratio = model.vp[i] / model.vs[i];
    if (ratio < worst) [worst, iWorst] = [ratio, i];
    if (ratio < b.minVpVsRatio) count++;
  }
  if (count > 0) {
    if (worst < Math.SQRT2) {
      throw new RangeError(`the starting model has Vp/Vs = ${fmt(worst)} at ${where(model, iWorst)}, below √2 (negative λ, ${count} cells below minVpVsRatio): fix the starting model`);
    }
    throw new RangeError(`the starting model has Vp/Vs = ${fmt(worst)} at ${where(model, iWorst)}, below minVpVsRatio = ${b.minVpVsRatio} (${count} cells below): lower minVpVsRatio to ${fmt(worst)} or less`);
  }
}

/**
 * Projects one cell's (vs, vp, rho) in physical units (see the module comment, steps 1 and 2).
 * `vpInverted` false keeps vp and lowers vs instead; `rhoInverted` false leaves rho alone.
 * Returns the projected triple; values already feasible come back unchanged (same numbers).
 */
export function projectCell(vs: number, vp: number, rho: number, b: ModelBounds, vpInverted: boolean, rhoInverted: boolean): [number, number, number] {
  const r = b.minVpVsRatio;
  vs = Math.min(b.vsMaxMps, Math.max(b.vsMinMps, vs));
  if (vpInverted) {
    vp = Math.min(b.vpMaxMps, Math.max(b.vpMinMps, vp));
    if (vp < r * vs) {
      vp = r * vs;
      if (vp > b.vpMaxMps) {
        vp = b.vpMaxMps;
        vs = b.vpMaxMps / r;
      }
    }
  } else if (vp < r * vs) vs = vp / r;
  if (rhoInverted) rho = Math.min(b.rhoMaxKgm3, Math.max(b.rhoMinKgm3, rho));
  return [vs, vp, rho];
}

/**
 * The projection of the optimiser vector x (layout and scaling of ./model-vector.ts), in place, for
 * L-BFGS's `project` option. Non-inverted parameters come from `base`; cells with `fixed[i] = 1`
 * are reset to `base`. A component is written only when the projection changes its value, so a
 * feasible x comes back bit for bit (the optimiser tells held components by comparing values).
 * `base` should pass {@link checkModelBounds} first.
 */
export function vectorProjection(set: InvertedParameters, ref: ReferenceValues, bounds: ModelBounds, base: ModelFields, fixed?: Uint8Array): (x: Float64Array) => void {
  checkBoundsConsistent(bounds);
  const n = assertModelFields(base);
  const names = parameterNames(set);
  if (fixed && fixed.length !== n) throw new RangeError(`fixed must hold ${n} flags, got ${fixed.length}`);
  const vpInverted = names.includes("vp");
  const rhoInverted = names.includes("rho");
  const refVs = ref.vsMps;
  const refVp = ref.vpMps;
  const refRho = ref.rhoKgm3;
  for (const [name, v] of [["vsMps", refVs], ["vpMps", refVp], ["rhoKgm3", refRho]] as const) {
    if (!(v > 0 && Number.isFinite(v))) throw new RangeError(`reference ${name} must be a positive number, got ${v}`);
  }
  const size = names.length * n;
  return (x: Float64Array) => {
    if (x.length !== size) throw new RangeError(`x must hold ${size} values for "${set}", got ${x.length}`);
    for (let i = 0; i < n; i++) {
      if (fixed && fixed[i]) {
        x[i] = base.vs[i] / refVs;
        if (vpInverted) x[n + i] = base.vp[i] / refVp;
        if (rhoInverted) x[2 * n + i] = base.rho[i] / refRho;
        continue;
      }
      const vs = x[i] * refVs;
      const vp = vpInverted ? x[n + i] * refVp : base.vp[i];
      const rho = rhoInverted ? x[2 * n + i] * refRho : base.rho[i];
      const [pvs, pvp, prho] = projectCell(vs, vp, rho, bounds, vpInverted, rhoInverted);
      if (pvs !== vs) x[i] = pvs / refVs;
      if (vpInverted && pvp !== vp) x[n + i] = pvp / refVp;
      if (rhoInverted && prho !== rho) x[2 * n + i] = prho / refRho;
    }
  };
}
