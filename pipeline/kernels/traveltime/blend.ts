/**
 * Blending a tomogram into a model grid "above the depth the rays reach" (common practice: trust
 * a travel-time result only where rays pass, and keep the other model below).
 *
 * At a model node (x, z) the weight of the tomogram is 1 down to `reach − taperM`, falls linearly
 * to 0 at the depth the rays reach in that column (`reachDepthM`, interpolated between the
 * tomogram's columns), and is 0 below it, outside the tomogram, and in columns no ray reaches.
 * The tomogram's velocity is interpolated bilinearly at the node.
 *
 * Layout: fields flat row-major `[z][x]` on nodes, as in the elastic model.
 */
import type { ElasticModel, Tomogram } from "../../types";
import { interpolateNodes } from "./eikonal";

/** Outcome of {@link blendTomogram}. */
export interface BlendedVelocity {
  /** Blended velocity on the model's grid (Vp or Vs as the tomogram's `wave` says), m/s, `[z][x]`. */
  velocity: Float32Array;
  /** Weight of the tomogram per model node in [0, 1], `[z][x]`. */
  weight: Float32Array;
}

/**
 * The model's Vp (tomogram wave "p") or Vs ("s") with the tomogram blended in above the depth
 * its rays reach; `taperM` (≥ 0) is the depth over which the weight falls to zero.
 */
export function blendTomogram(model: ElasticModel, tomogram: Tomogram, taperM = 1): BlendedVelocity {
  if (!(taperM >= 0) || !Number.isFinite(taperM)) throw new RangeError(`taperM must be ≥ 0, got ${taperM}`);
  const { nx, nz, spacingM: h, originX, originZ } = model;
  const base = tomogram.wave === "p" ? model.vp : model.vs;
  if (base.length !== nx * nz) throw new RangeError(`model ${tomogram.wave === "p" ? "vp" : "vs"} must have nx·nz = ${nx * nz} values, got ${base.length}`);
  const t = tomogram;
  const tGrid = { nx: t.nx, nz: t.nz, spacingM: t.spacingM };
  const tRight = t.originX + (t.nx - 1) * t.spacingM;
  const tBottom = t.originZ + (t.nz - 1) * t.spacingM;
  const velocity = new Float32Array(nx * nz);
  const weight = new Float32Array(nx * nz);
  for (let ix = 0; ix < nx; ix++) {
    const x = originX + ix * h;
    // Reach at x: linear between the two tomogram columns around it; NaN if either has none.
    let reach = NaN;
    if (x >= t.originX - 1e-9 && x <= tRight + 1e-9) {
      const f = Math.min(Math.max((x - t.originX) / t.spacingM, 0), t.nx - 1);
      const c0 = Math.min(Math.floor(f), t.nx - 2);
      const u = f - c0;
      const r0 = t.reachDepthM[c0];
      const r1 = t.reachDepthM[c0 + 1];
      reach = u < 1e-9 ? r0 : u > 1 - 1e-9 ? r1 : (1 - u) * r0 + u * r1;
    }
    for (let iz = 0; iz < nz; iz++) {
      const k = iz * nx + ix;
      const z = originZ + iz * h;
      let w = 0;
      if (reach === reach && z >= t.originZ - 1e-9 && z <= tBottom + 1e-9) {
        if (z <= reach - taperM) w = 1;
        else if (z < reach) w = (reach - z) / taperM;
        else if (z === reach && taperM === 0) w = 1;
      }
      weight[k] = w;
      velocity[k] = w > 0 ? w * interpolateNodes(t.velocity, tGrid, x - t.originX, z - t.originZ) + (1 - w) * base[k] : base[k];
    }
  }
  return { velocity, weight };
}
