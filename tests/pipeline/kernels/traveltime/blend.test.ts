import { describe, expect, it } from "vitest";
import { blendTomogram } from "../../../../pipeline/kernels/traveltime/blend";
import type { ElasticModel, Tomogram } from "../../../../pipeline/types";

/** A model 0 … 20 m × 0 … 10 m at 1 m with Vp 1000, Vs 300, and a tomogram over x 4 … 16 m at 0.5 m with Vp 600. */
function fixtures(): { model: ElasticModel; tomogram: Tomogram } {
  const nx = 21;
  const nz = 11;
  const model: ElasticModel = {
    kind: "model", nx, nz, spacingM: 1, originX: 0, originZ: 0,
    vp: new Float32Array(nx * nz).fill(1000), vs: new Float32Array(nx * nz).fill(300), rho: new Float32Array(nx * nz).fill(1800),
  };
  const tnx = 25;
  const tnz = 21;
  const reach = new Float32Array(tnx).fill(6);
  reach[0] = NaN; // x = 4 m: no ray
  const tomogram: Tomogram = {
    kind: "tomogram", wave: "p", nx: tnx, nz: tnz, spacingM: 0.5, originX: 4, originZ: 0,
    velocity: new Float32Array(tnx * tnz).fill(600), startingVelocity: new Float32Array(tnx * tnz).fill(500),
    coverageM: new Float32Array(tnx * tnz), rayCount: new Int32Array(tnx * tnz), coverageThresholdM: 1,
    reachDepthM: reach, rayPoints: new Float32Array(0), rayStart: new Int32Array(1), picks: [], iterations: [],
  };
  return { model, tomogram };
}

describe("blending a tomogram above the depth its rays reach", () => {
  it("takes the tomogram above reach − taper, the model below the reach, a linear mix between", () => {
    const { model, tomogram } = fixtures();
    const { velocity, weight } = blendTomogram(model, tomogram, 2);
    const at = (x: number, z: number) => velocity[z * model.nx + x];
    // Column x = 10 m: reach 6 m, taper 2 m: weight 1 to 4 m, ½ at 5 m, 0 from 6 m.
    for (const z of [0, 1, 2, 3, 4]) expect(at(10, z)).toBeCloseTo(600, 4);
    expect(weight[5 * model.nx + 10]).toBeCloseTo(0.5, 6);
    expect(at(10, 5)).toBeCloseTo(800, 4);
    for (const z of [6, 7, 10]) expect(at(10, z)).toBe(1000);
    // Outside the tomogram (x < 4 or x > 16 m) and in its ray-free first column: the model.
    for (const x of [0, 3, 4, 17, 20]) expect(at(x, 0)).toBe(1000);
    // x = 5 m lies between columns that both have rays: blended.
    expect(at(5, 0)).toBeCloseTo(600, 4);
    // The model is not changed in place; an S tomogram replaces Vs instead.
    expect(model.vp[10]).toBe(1000);
    const s = blendTomogram(model, { ...tomogram, wave: "s", velocity: new Float32Array(tomogram.velocity.length).fill(200) }, 0);
    expect(s.velocity[10]).toBeCloseTo(200, 4);
    expect(s.velocity[6 * model.nx + 10]).toBeCloseTo(200, 4);
    expect(s.velocity[7 * model.nx + 10]).toBe(300);
    expect(() => blendTomogram(model, tomogram, -1)).toThrow(/taperM/);
  });
});
