import { describe, expect, it } from "vitest";
import { gaussianSmooth, multiplyInPlace, pointTaperWeights, pseudoHessianPrecondition, zeroFixedCells, type GridGeometry } from "../../../../pipeline/kernels/conditioning/gradient";
import { seededRandom } from "../../../helpers/random";

const grid: GridGeometry = { nx: 61, nz: 41, spacingM: 0.25, originX: 2, originZ: 0 };

describe("Gaussian smoothing of the gradient", () => {
  it("turns a delta into the sampled Gaussian exp(−r²/2σ²), normalised to unit sum (separability of the Gaussian, closed form)", () => {
    // 71 × 71 cells, delta in the middle: every cell the smoothed delta reaches (15 cells) lies at
    // least 20 cells from an edge, where no renormalisation happens (it does within 15 cells of an edge).
    const grid = { nx: 71, nz: 71, spacingM: 0.25 };
    const field = new Float64Array(grid.nx * grid.nz);
    const [ix0, iz0] = [35, 35];
    field[iz0 * grid.nx + ix0] = 1;
    const sigmaM = 0.75; // 3 cells; the kernel is cut at 5σ = 15 cells
    const out = gaussianSmooth(field, grid, sigmaM);
    // Reference: the 2D Gaussian sampled on the (2·15 + 1)² square around the delta, divided by its sum.
    const half = 15;
    let sum = 0;
    const ref = new Float64Array(field.length);
    for (let iz = iz0 - half; iz <= iz0 + half; iz++) {
      for (let ix = ix0 - half; ix <= ix0 + half; ix++) {
        const r2 = ((ix - ix0) ** 2 + (iz - iz0) ** 2) * grid.spacingM ** 2;
        ref[iz * grid.nx + ix] = Math.exp(-r2 / (2 * sigmaM * sigmaM));
        sum += ref[iz * grid.nx + ix];
      }
    }
    // exp(a)·exp(b) against exp(a + b) and two normalisations against one: rounding, well under 1e-13 of the peak.
    const peak = 1 / sum;
    for (let i = 0; i < field.length; i++) expect(Math.abs(out[i] - ref[i] / sum)).toBeLessThan(1e-13 * peak);
    // Second moment along x equals σ² (definition of the Gaussian's variance); the cut at 5σ and
    // the sampling (Poisson summation, error ~ e^(−2π²·3²)) leave about 1.5e-5 relative.
    let m2 = 0;
    let mass = 0;
    for (let iz = 0; iz < grid.nz; iz++) for (let ix = 0; ix < grid.nx; ix++) {
      const v = out[iz * grid.nx + ix];
      mass += v;
      m2 += v * ((ix - ix0) * grid.spacingM) ** 2;
    }
    expect(mass).toBeCloseTo(1, 12);
    expect(Math.abs(m2 / (sigmaM * sigmaM) - 1)).toBeLessThan(1e-4);
  });

  it("keeps a constant field constant, edges included (weights renormalised inside the grid)", () => {
    const field = new Float32Array(grid.nx * grid.nz).fill(3.5);
    const out = gaussianSmooth(field, grid, 2);
    for (let i = 0; i < out.length; i++) expect(out[i]).toBeCloseTo(3.5, 12);
  });

  it("with length 0 returns the field unchanged and does not mutate its input", () => {
    const field = seededRandom(4).fillGaussian(new Float64Array(grid.nx * grid.nz));
    const copy = field.slice();
    expect(Array.from(gaussianSmooth(field, grid, 0))).toEqual(Array.from(field));
    const smoothed = gaussianSmooth(field, grid, 1);
    expect(field).toEqual(copy);
    // In place (out = field) gives the same numbers.
    gaussianSmooth(field, grid, 1, field);
    expect(field).toEqual(smoothed);
  });
});

describe("tapers around sources and receivers", () => {
  it("weighs 0 at the point, ½ at half the radius and 1 at and beyond the radius (raised cosine ½(1 − cos πr/R))", () => {
    // The point sits on a cell centre: column 20 (x = 2 + 20·0.25 = 7 m), row 8 (z = 2 m).
    const w = pointTaperWeights(grid, [{ xM: 7, zM: 2 }], 1);
    const at = (ix: number, iz: number) => w[iz * grid.nx + ix];
    expect(at(20, 8)).toBe(0);
    expect(at(22, 8)).toBeCloseTo(0.5, 12); // r = 0.5 m = R/2
    expect(at(20, 10)).toBeCloseTo(0.5, 12);
    expect(at(24, 8)).toBe(1); // r = R
    expect(at(21, 8)).toBeCloseTo(0.5 * (1 - Math.cos(Math.PI / 4)), 12); // r = 0.25 m
    expect(at(0, 0)).toBe(1);
    // Monotone in r along a row.
    for (let ix = 20; ix < 24; ix++) expect(at(ix + 1, 8)).toBeGreaterThan(at(ix, 8));
  });

  it("multiplies the tapers of overlapping points", () => {
    const a = pointTaperWeights(grid, [{ xM: 7, zM: 0 }], 1);
    const b = pointTaperWeights(grid, [{ xM: 7.5, zM: 0 }], 1);
    const both = pointTaperWeights(grid, [{ xM: 7, zM: 0 }, { xM: 7.5, zM: 0 }], 1);
    for (let i = 0; i < both.length; i++) expect(both[i]).toBeCloseTo(a[i] * b[i], 14);
    const g = new Float64Array(both.length).fill(2);
    multiplyInPlace(g, both);
    expect(g[20]).toBe(0);
  });
});

describe("pseudo-Hessian preconditioning and masks", () => {
  it("divides by illumination + ε·max illumination (Shin et al. 2001)", () => {
    const g = new Float64Array([1, -2, 3, 4]);
    const illum = new Float64Array([0, 1, 4, 2]);
    const out = pseudoHessianPrecondition(g, illum, 0.25);
    expect(Array.from(out)).toEqual([1 / 1, -2 / 2, 3 / 5, 4 / 3]);
    expect(() => pseudoHessianPrecondition(g, new Float64Array(4), 0.1)).toThrow(/zero everywhere/);
    expect(() => pseudoHessianPrecondition(g, illum, 0)).toThrow(/epsilon/);
  });

  it("zeroes the gradient of fixed cells only", () => {
    const g = new Float32Array([1, 2, 3, 4]);
    zeroFixedCells(g, new Uint8Array([0, 1, 0, 1]));
    expect(Array.from(g)).toEqual([1, 0, 3, 0]);
  });
});
