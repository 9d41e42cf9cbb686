import { describe, expect, it } from "vitest";
import { eikonalTimes, type TravelTimeGrid } from "../../../../pipeline/kernels/traveltime/eikonal";
import { prepareRayWorkspace, traceRay } from "../../../../pipeline/kernels/traveltime/rays";

function gradientSlowness(grid: TravelTimeGrid, v0: number, g: number): Float64Array {
  const s = new Float64Array(grid.nx * grid.nz);
  for (let iz = 0; iz < grid.nz; iz++) s.fill(1 / (v0 + g * iz * grid.spacingM), iz * grid.nx, (iz + 1) * grid.nx);
  return s;
}

describe("rays by steepest descent on the travel times", () => {
  it("are straight in a homogeneous medium: length = source–receiver distance within a cell", () => {
    const h = 0.5;
    const grid = { nx: 101, nz: 41, spacingM: h };
    const s = new Float64Array(grid.nx * grid.nz).fill(1 / 800);
    const [xs, zs] = [12.3, 0.7];
    const ws = prepareRayWorkspace(eikonalTimes(s, grid, xs, zs).times, grid);
    for (const [xr, zr] of [[40, 0], [0, 0], [13, 15], [49.5, 19.5], [30.2, 8.8]]) {
      const ray = traceRay(ws, grid, xs, zs, xr, zr);
      const distance = Math.hypot(xr - xs, zr - zs);
      expect(ray.reached).toBe(true);
      expect(Math.abs(ray.lengthM - distance), `receiver ${xr}, ${zr}`).toBeLessThan(h);
      // The entries of the sensitivity row share the ray length out among the cells.
      expect(ray.lengthsM.reduce((a, b) => a + b, 0)).toBeCloseTo(ray.lengthM, 9);
      // Every point stays within a cell of the straight line.
      for (let p = 0; p < ray.path.length; p += 2) {
        const cross = Math.abs((xr - xs) * (ray.path[p + 1] - zs) - (zr - zs) * (ray.path[p] - xs)) / distance;
        expect(cross).toBeLessThan(h);
      }
    }
  });

  it("follow the circular arc of a constant-gradient medium (Slotnick 1959: rays in v0 + g·z are circles centred at z = −v0/g)", () => {
    const v0 = 400;
    const g = 30;
    const h = 0.5;
    const grid = { nx: 121, nz: 41, spacingM: h };
    const slowness = gradientSlowness(grid, v0, g);
    const xs = 5;
    const ws = prepareRayWorkspace(eikonalTimes(slowness, grid, xs, 0).times, grid);
    for (const offset of [10, 25, 40, 55]) {
      const ray = traceRay(ws, grid, xs, 0, xs + offset, 0);
      expect(ray.reached).toBe(true);
      // Circle through both surface points with centre at depth −v0/g: radius
      // R = √((x/2)² + (v0/g)²); deepest point R − v0/g; length R·2·asin(x / 2R).
      const R = Math.hypot(offset / 2, v0 / g);
      const deepest = R - v0 / g;
      const arc = 2 * R * Math.asin(offset / (2 * R));
      let zMax = 0;
      for (let p = 1; p < ray.path.length; p += 2) zMax = Math.max(zMax, ray.path[p]);
      expect(Math.abs(zMax - deepest), `turning depth at offset ${offset} m`).toBeLessThan(h);
      expect(Math.abs(ray.lengthM - arc), `arc length at offset ${offset} m`).toBeLessThan(h);
      // Fermat: the travel time along the ray, Σ length·slowness, is the eikonal time (2/g)·asinh(gx/2v0).
      let t = 0;
      for (let j = 0; j < ray.nodes.length; j++) t += ray.lengthsM[j] * slowness[ray.nodes[j]];
      const exact = (2 / g) * Math.asinh((g * offset) / (2 * v0));
      expect(Math.abs(t - exact) / exact, `ray time at offset ${offset} m`).toBeLessThan(0.005);
    }
  });

  it("refuse positions off the grid", () => {
    const grid = { nx: 5, nz: 5, spacingM: 1 };
    const ws = prepareRayWorkspace(new Float64Array(25), grid);
    expect(() => traceRay(ws, grid, 0, 0, 9, 0)).toThrow(/receiverX/);
    expect(() => traceRay(ws, grid, 0, -3, 2, 0)).toThrow(/sourceZ/);
    expect(() => prepareRayWorkspace(new Float64Array(24), grid)).toThrow(/times/);
  });
});
