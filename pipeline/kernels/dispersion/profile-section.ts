/**
 * A 2D elastic model from 1D layered profiles along the line: each profile stands at its
 * position x; between neighbouring positions the properties are interpolated linearly in x at
 * each depth, beyond the first and last profile they are held constant (common practice for a
 * moving-window surface-wave section). Below a profile's depth of investigation its value at
 * that depth continues downward (the deepest resolved layer), or, when a background model is
 * given, the background's cells are kept there.
 *
 * Grid layout: flat row-major `[z][x]` as ElasticModel (pipeline/types.ts). Units: m, m/s, kg/m³.
 */
import type { ElasticModel } from "../../types";

/** One layered profile placed along the line. */
export interface PlacedProfile {
  /** Position along the line, m. */
  x: number;
  /** Layer thicknesses, m (last entry, the half-space's, ignored). */
  thicknessM: ArrayLike<number>;
  vp: ArrayLike<number>;
  vs: ArrayLike<number>;
  rho: ArrayLike<number>;
  /** Depth below which the profile is not resolved, m. */
  depthOfInvestigationM: number;
}

/** Grid of the section. */
export interface SectionGrid {
  originX: number;
  originZ: number;
  spacingM: number;
  nx: number;
  nz: number;
}

/** Properties of a layered profile at depth z (layer tops belong to the layer below them). */
function sampleProfile(p: PlacedProfile, z: number, out: Float64Array): void {
  const n = p.vs.length;
  let top = 0;
  let layer = n - 1;
  for (let i = 0; i < n - 1; i++) {
    const bottom = top + p.thicknessM[i];
    if (z < bottom) {
      layer = i;
      break;
    }
    top = bottom;
  }
  out[0] = p.vp[layer];
  out[1] = p.vs[layer];
  out[2] = p.rho[layer];
}

/**
 * Builds the section. With `background` (same grid), cells deeper than the interpolated depth
 * of investigation take the background's values; without, the profile value at its depth of
 * investigation continues downward.
 */
export function profilesToModel(profiles: PlacedProfile[], grid: SectionGrid, background?: ElasticModel): ElasticModel {
  const { nx, nz, spacingM: h, originX, originZ } = grid;
  if (profiles.length === 0) throw new RangeError("profiles must hold at least one profile, got 0");
  if (!(h > 0)) throw new RangeError(`spacingM must be > 0, got ${h}`);
  if (!Number.isInteger(nx) || nx < 1 || !Number.isInteger(nz) || nz < 1) throw new RangeError(`nx and nz must be integers ≥ 1, got ${nx}, ${nz}`);
  if (background && (background.nx !== nx || background.nz !== nz)) {
    throw new RangeError(`background is ${background.nx} × ${background.nz}, the grid ${nx} × ${nz}`);
  }
  profiles.forEach((p, i) => {
    if (!(p.depthOfInvestigationM > 0)) throw new RangeError(`profiles[${i}].depthOfInvestigationM must be > 0, got ${p.depthOfInvestigationM}`);
  });
  const sorted = [...profiles].sort((a, b) => a.x - b.x);
  const vp = new Float32Array(nx * nz);
  const vs = new Float32Array(nx * nz);
  const rho = new Float32Array(nx * nz);
  const a = new Float64Array(3);
  const b = new Float64Array(3);
  for (let ix = 0; ix < nx; ix++) {
    const x = originX + ix * h;
    // Neighbouring profiles and the weight of the right one.
    let iL = 0;
    let iR = 0;
    let w = 0;
    if (x <= sorted[0].x) {
      iL = iR = 0;
    } else if (x >= sorted[sorted.length - 1].x) {
      iL = iR = sorted.length - 1;
    } else {
      iR = sorted.findIndex((p) => p.x > x);
      iL = iR - 1;
      w = (x - sorted[iL].x) / (sorted[iR].x - sorted[iL].x);
    }
    const pL = sorted[iL];
    const pR = sorted[iR];
    const doi = (1 - w) * pL.depthOfInvestigationM + w * pR.depthOfInvestigationM;
    for (let iz = 0; iz < nz; iz++) {
      const z = originZ + iz * h;
      const k = iz * nx + ix;
      if (z > doi && background) {
        vp[k] = background.vp[k];
        vs[k] = background.vs[k];
        rho[k] = background.rho[k];
        continue;
      }
      // At and below the depth of investigation: the layer just above it (a layer boundary at
      // that depth belongs to the unresolved layer below).
      sampleProfile(pL, z < pL.depthOfInvestigationM ? z : pL.depthOfInvestigationM * (1 - 1e-9), a);
      sampleProfile(pR, z < pR.depthOfInvestigationM ? z : pR.depthOfInvestigationM * (1 - 1e-9), b);
      vp[k] = (1 - w) * a[0] + w * b[0];
      vs[k] = (1 - w) * a[1] + w * b[1];
      rho[k] = (1 - w) * a[2] + w * b[2];
    }
  }
  return { kind: "model", nx, nz, spacingM: h, originX, originZ, vp, vs, rho };
}
