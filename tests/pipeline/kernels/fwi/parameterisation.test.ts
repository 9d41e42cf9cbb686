import { describe, expect, it } from "vitest";
import {
  buildScale,
  checkModelInsideBounds,
  gaussianSmoothSymmetric,
  modelFromVector,
  pointTaper,
  vectorGradient,
  vectorLength,
  type ModelBounds,
  type Parameterisation,
} from "../../../../pipeline/kernels/fwi/parameterisation";
import type { ElasticModel } from "../../../../pipeline/types";
import { seededRandom } from "../../../helpers/random";

const bounds: ModelBounds = { vsMin: 50, vsMax: 600, vpMin: 100, vpMax: 3000, rhoMin: 1000, rhoMax: 3000, minVpVsRatio: 1.5 };

function model(nx: number, nz: number): ElasticModel {
  const n = nx * nz;
  const vs = new Float32Array(n);
  const vp = new Float32Array(n);
  const rho = new Float32Array(n);
  for (let j = 0; j < nz; j++) {
    for (let i = 0; i < nx; i++) {
      vs[j * nx + i] = 150 + 10 * j;
      vp[j * nx + i] = 600 + 20 * j;
      rho[j * nx + i] = 1800;
    }
  }
  return { kind: "model", nx, nz, spacingM: 0.5, originX: 0, originZ: 0, vp, vs, rho };
}

function param(set: Parameterisation["set"], m: ElasticModel, smoothingCells: number): Parameterisation {
  const n = m.nx * m.nz;
  const fixed = new Uint8Array(n);
  for (let i = 0; i < m.nx; i++) fixed[i] = 1; // top row held
  return {
    set,
    nx: m.nx,
    nz: m.nz,
    spacingM: m.spacingM,
    start: m,
    scale: buildScale(set, m, { illumination: null, stabilisation: 0.05, fixed, taper: new Float64Array(n).fill(1) }),
    smoothingCells,
    bounds,
  };
}

describe("inversion parameterisation", () => {
  it("smoothing is symmetric: <S a, b> = <a, S b> (the adjoint identity the gradient relies on)", () => {
    const rnd = seededRandom(7).uniform;
    const nx = 17;
    const nz = 11;
    const a = Float64Array.from({ length: nx * nz }, () => rnd() - 0.5);
    const b = Float64Array.from({ length: nx * nz }, () => rnd() - 0.5);
    const sa = gaussianSmoothSymmetric(a, nx, nz, 1.7);
    const sb = gaussianSmoothSymmetric(b, nx, nz, 1.7);
    let l = 0;
    let r = 0;
    for (let i = 0; i < a.length; i++) {
      l += sa[i] * b[i];
      r += a[i] * sb[i];
    }
    // Exact in exact arithmetic (a symmetric kernel with zero padding); rounding only.
    expect(Math.abs(l - r)).toBeLessThan(1e-12 * Math.max(1, Math.abs(l)));
  });

  it("smoothing keeps the sum of a centred delta (weights normalised in the interior) and its Gaussian shape", () => {
    const nx = 41;
    const nz = 41;
    const d = new Float64Array(nx * nz);
    d[20 * nx + 20] = 1;
    const s = gaussianSmoothSymmetric(d, nx, nz, 2);
    const total = s.reduce((acc, v) => acc + v, 0);
    expect(total).toBeCloseTo(1, 12);
    // Separable sampled Gaussian: ratio of neighbours e^(−(1)/(2σ²)) along x at the centre row.
    expect(s[20 * nx + 21] / s[20 * nx + 20]).toBeCloseTo(Math.exp(-1 / 8), 10);
  });

  it.each(["vs", "vs-vp", "vs-vp-rho"] as const)("the x-gradient is the exact chain rule of the model map (%s), checked by central differences", (set) => {
    const m = model(12, 9);
    const p = param(set, m, 1.2);
    const rnd = seededRandom(11).uniform;
    const n = m.nx * m.nz;
    // A smooth objective of the model: J = Σ c_p · m_p² / 2 with random weights (common practice: a test objective with a known gradient).
    const c = { vs: Float64Array.from({ length: n }, () => rnd()), vp: Float64Array.from({ length: n }, () => rnd()), rho: Float64Array.from({ length: n }, () => rnd()) };
    const J = (mm: ElasticModel) => {
      let s = 0;
      for (let i = 0; i < n; i++) s += 0.5 * (c.vs[i] * mm.vs[i] ** 2 + c.vp[i] * mm.vp[i] ** 2 + c.rho[i] * mm.rho[i] ** 2) * 1e-6;
      return s;
    };
    const dJ = (mm: ElasticModel) => ({
      vs: Float64Array.from({ length: n }, (_, i) => c.vs[i] * mm.vs[i] * 1e-6),
      vp: Float64Array.from({ length: n }, (_, i) => c.vp[i] * mm.vp[i] * 1e-6),
      rho: Float64Array.from({ length: n }, (_, i) => c.rho[i] * mm.rho[i] * 1e-6),
    });
    const x = Float64Array.from({ length: vectorLength(p) }, () => 0.02 * (rnd() - 0.5));
    const dir = Float64Array.from({ length: x.length }, () => rnd() - 0.5);
    const g = vectorGradient(p, x, dJ(modelFromVector(p, x)));
    let analytic = 0;
    for (let i = 0; i < x.length; i++) analytic += g[i] * dir[i];
    // J is quadratic in m and m is linear in x away from the bounds, so central differences are exact
    // up to rounding for any step; a large one keeps the float32 model rounding small.
    const h = 1e-2;
    const xp = x.map((v, i) => v + h * dir[i]);
    const xm = x.map((v, i) => v - h * dir[i]);
    const fd = (J(modelFromVector(p, Float64Array.from(xp))) - J(modelFromVector(p, Float64Array.from(xm)))) / (2 * h);
    expect(Math.abs(fd - analytic) / Math.abs(analytic)).toBeLessThan(1e-3);
  });

  it("keeps every bound, Vp/Vs included, however far x goes, and holds fixed cells", () => {
    const m = model(10, 8);
    const p = param("vs-vp", m, 0);
    const x = new Float64Array(vectorLength(p));
    const n = m.nx * m.nz;
    for (let i = 0; i < n; i++) {
      x[i] = i % 2 ? 50 : -50; // Vs pushed far both ways
      x[n + i] = -50; // Vp pushed far down
    }
    const out = modelFromVector(p, x);
    for (let i = 0; i < n; i++) {
      expect(out.vs[i]).toBeGreaterThanOrEqual(bounds.vsMin);
      expect(out.vs[i]).toBeLessThanOrEqual(bounds.vsMax);
      expect(out.vp[i] / out.vs[i]).toBeGreaterThanOrEqual(bounds.minVpVsRatio * (1 - 1e-6));
      if (i < m.nx) {
        expect(out.vs[i]).toBe(m.vs[i]);
        expect(out.vp[i]).toBe(m.vp[i]);
      }
    }
  });

  it("refuses a starting model outside the bounds, naming the bound to change", () => {
    const m = model(4, 4);
    expect(() => checkModelInsideBounds(m, { ...bounds, vsMax: 160 })).toThrow(/raise vsMax/);
    expect(() => checkModelInsideBounds(m, { ...bounds, minVpVsRatio: 1.4 })).toThrow(/above √2/);
    m.vp[3] = 1.45 * m.vs[3];
    expect(() => checkModelInsideBounds(m, bounds)).toThrow(/minVpVsRatio/);
  });

  it("point taper: 0 at the point, ½ at half the radius, 1 beyond (cosine ramp, common practice)", () => {
    const m = model(21, 11);
    const t = pointTaper(m, [{ x: 5, z: 0 }], 2);
    const at = (x: number, z: number) => t[Math.round(z / 0.5) * m.nx + Math.round(x / 0.5)];
    expect(at(5, 0)).toBe(0);
    expect(at(6, 0)).toBeCloseTo(0.5, 12);
    expect(at(7.5, 0)).toBe(1);
  });
});
