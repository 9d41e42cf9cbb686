/** Model grids from descriptions, and the CSV form. */
import { describe, expect, it } from "vitest";
import { buildModel, countShapeCells, modelFromCsv, modelToCsv, shapeContains } from "../../../../pipeline/kernels/fd/model-grid";
import { mulberry32 } from "../../../helpers/random";
import { exportArtifact } from "../../../../pipeline/export";

const grid = { originX: -2, originZ: 0, spacingM: 0.5, nx: 41, nz: 21 };

describe("buildModel", () => {
  it("evaluates layers with vertical gradients at each row's depth", () => {
    const m = buildModel(grid, [
      { topM: 0, vp: 400, vs: 140, rho: 1700, vsGradient: 12, rhoGradient: 25 },
      { topM: 4, vp: 1600, vs: 200, rho: 1900 },
    ]);
    // Row 6 is z = 3 m: 140 + 12·3 = 176 m/s; row 8 is z = 4 m, the top of the second layer.
    expect(m.vs[6 * m.nx + 10]).toBeCloseTo(176, 4);
    expect(m.rho[6 * m.nx]).toBeCloseTo(1775, 3);
    expect(m.vp[7 * m.nx]).toBe(400);
    expect(m.vp[8 * m.nx]).toBe(1600);
    expect(m.vs[20 * m.nx + 40]).toBe(200);
  });

  it("draws rectangles, ellipses and polygons over the layers, later shapes on top", () => {
    const m = buildModel(grid, [{ topM: 0, vp: 600, vs: 200, rho: 1800 }], [
      { kind: "rectangle", x0M: 0, x1M: 4, z0M: 0, z1M: 2, vs: 100, vp: 300 },
      { kind: "ellipse", centerXM: 10, centerZM: 5, radiusXM: 2, radiusZM: 1, rho: 2600, vp: 900, vs: 450 },
      { kind: "polygon", points: [[2, 0], [6, 0], [4, 3]], vs: 90, vp: 250, rho: 1500 },
    ]);
    const at = (x: number, z: number) => ((z - grid.originZ) / 0.5) * m.nx + (x - grid.originX) / 0.5;
    expect(m.vs[at(0, 1)]).toBe(100); // rectangle only
    expect(m.vs[at(4, 1)]).toBe(90); // polygon over the rectangle
    expect(m.vs[at(4, 2.5)]).toBe(90); // polygon tip region
    expect(m.vs[at(4, 3.5)]).toBe(200); // below the tip
    expect(m.rho[at(10, 5)]).toBe(2600);
    expect(m.rho[at(12, 5)]).toBe(2600); // on the ellipse boundary
    expect(m.rho[at(12, 5.5)]).toBe(1800);
    expect(m.vs[at(-2, 0)]).toBe(200);
  });

  it("point-in-polygon agrees with the triangle's barycentric test on random points", () => {
    // Reference: barycentric coordinates (common practice) for a triangle.
    const tri: [number, number][] = [[1, 1], [9, 2], [3, 8]];
    const rnd = mulberry32(42);
    const [a, b, c] = tri;
    const det = (b[1] - c[1]) * (a[0] - c[0]) + (c[0] - b[0]) * (a[1] - c[1]);
    for (let k = 0; k < 2000; k++) {
      const x = 10 * rnd();
      const z = 10 * rnd();
      const l1 = ((b[1] - c[1]) * (x - c[0]) + (c[0] - b[0]) * (z - c[1])) / det;
      const l2 = ((c[1] - a[1]) * (x - c[0]) + (a[0] - c[0]) * (z - c[1])) / det;
      const l3 = 1 - l1 - l2;
      const inside = l1 > 1e-9 && l2 > 1e-9 && l3 > 1e-9;
      const outside = l1 < -1e-9 || l2 < -1e-9 || l3 < -1e-9;
      if (inside) expect(shapeContains({ kind: "polygon", points: tri, vs: 1 }, x, z)).toBe(true);
      if (outside) expect(shapeContains({ kind: "polygon", points: tri, vs: 1 }, x, z)).toBe(false);
    }
  });

  it("counts the nodes a shape covers (none for a shape outside the grid)", () => {
    expect(countShapeCells(grid, { kind: "rectangle", x0M: 0, x1M: 1, z0M: 0, z1M: 1, vs: 1 })).toBe(9);
    expect(countShapeCells(grid, { kind: "ellipse", centerXM: 100, centerZM: 2, radiusXM: 1, radiusZM: 1, vs: 1 })).toBe(0);
  });
});

describe("CSV grids", () => {
  it("round-trips a model through CSV", () => {
    const m = buildModel(grid, [{ topM: 0, vp: 400.5, vs: 140.25, rho: 1700, vsGradient: 7.3 }]);
    const back = modelFromCsv(modelToCsv(m));
    expect(back.nx).toBe(m.nx);
    expect(back.nz).toBe(m.nz);
    expect(back.originX).toBe(-2);
    expect(back.spacingM).toBeCloseTo(0.5, 12);
    expect(Array.from(back.vs)).toEqual(Array.from(m.vs));
    expect(Array.from(back.rho)).toEqual(Array.from(m.rho));
  });

  it("reads the model CSV that the artifact export writes", () => {
    const m = buildModel(grid, [{ topM: 0, vp: 400.5, vs: 140.25, rho: 1700 }]);
    const back = modelFromCsv(new TextDecoder().decode(exportArtifact(m, "csv")));
    expect([back.nx, back.nz, back.originX, back.originZ]).toEqual([m.nx, m.nz, m.originX, m.originZ]);
    expect(back.vs[5]).toBe(140.25);
  });

  it("accepts any column order and row order, comments and blank lines", () => {
    const rows = ["# exported", "rho,vs,vp,z,x"];
    for (let j = 3; j >= 0; j--) for (let i = 0; i < 4; i++) rows.push(`${1800 + j},${200 + i},${600 + i},${j * 2},${10 + i * 2}`, "");
    const m = modelFromCsv(rows.join("\n"));
    expect([m.nx, m.nz, m.spacingM, m.originX, m.originZ]).toEqual([4, 4, 2, 10, 0]);
    expect(m.vs[2 * 4 + 3]).toBe(203);
    expect(m.rho[2 * 4 + 3]).toBe(1802);
  });

  it("names the line of a bad value, a missing node and an irregular spacing", () => {
    const ok = ["x,z,vp,vs,rho"];
    for (let j = 0; j < 4; j++) for (let i = 0; i < 5; i++) ok.push(`${i},${j},600,200,1800`);
    const bad = [...ok];
    bad[6] = "1,1,fast,200,1800";
    expect(() => modelFromCsv(bad.join("\n"), "ground.csv")).toThrow(/ground\.csv: line 7: column "vp" is "fast"/);
    expect(() => modelFromCsv(ok.slice(0, 20).join("\n"), "g.csv")).toThrow(/g\.csv: line 1: 19 nodes for a 5 × 4 grid/);
    const irregular = [...ok];
    irregular[5] = "4.5,0,600,200,1800";
    expect(() => modelFromCsv(irregular.join("\n"))).toThrow(/line \d+: x = .* breaks the regular spacing/);
    expect(() => modelFromCsv("x,z,vp,vs\n1,2,3,4")).toThrow(/line 1: header lacks column "rho"/);
  });
});
