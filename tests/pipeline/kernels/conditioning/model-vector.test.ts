import { describe, expect, it } from "vitest";
import { checkBoundsConsistent, checkModelBounds, projectCell, vectorProjection, type ModelBounds } from "../../../../pipeline/kernels/conditioning/bounds";
import { gradientToVector, modelToVector, referenceValues, vectorToGradients, vectorToModel, type ModelFields } from "../../../../pipeline/kernels/conditioning/model-vector";
import { minimiseLbfgs } from "../../../../pipeline/kernels/optim/lbfgs";
import { seededRandom } from "../../../helpers/random";

const nx = 8;
const nz = 5;
const n = nx * nz;

function model(seed: number): ModelFields & { spacingM: number; originX: number; originZ: number } {
  const random = seededRandom(seed);
  const vs = new Float32Array(n);
  const vp = new Float32Array(n);
  const rho = new Float32Array(n);
  for (let i = 0; i < n; i++) {
    vs[i] = 150 + 100 * random.uniform();
    vp[i] = vs[i] * (1.8 + 0.5 * random.uniform());
    rho[i] = 1700 + 300 * random.uniform();
  }
  return { nx, nz, vs, vp, rho, spacingM: 0.5, originX: 0, originZ: 0 };
}

const bounds: ModelBounds = { vsMinMps: 80, vsMaxMps: 400, vpMinMps: 200, vpMaxMps: 900, rhoMinKgm3: 1500, rhoMaxKgm3: 2300, minVpVsRatio: 1.6 };

describe("model ↔ optimiser vector", () => {
  const m = model(1);
  const ref = referenceValues(m);

  it("scales each parameter by its reference (x = value/reference, O(1)) and maps back", () => {
    for (const set of ["vs", "vs-vp", "vs-vp-rho"] as const) {
      const x = modelToVector(m, set, ref);
      expect(x.length).toBe(set.split("-").length * n);
      for (const v of x) {
        expect(v).toBeGreaterThan(0.3);
        expect(v).toBeLessThan(3);
      }
      const back = vectorToModel(x, set, ref, m);
      // float32 → float64 / reference → × reference → float32 returns the same float32 (one rounding each way, far under half a float32 ulp).
      expect(back.vs).toEqual(m.vs);
      expect(back.vp).toEqual(m.vp);
      expect(back.rho).toEqual(m.rho);
    }
    const x = modelToVector(m, "vs-vp", ref);
    expect(x[n + 3]).toBeCloseTo(m.vp[3] / ref.vpMps, 14); // Vp block after Vs
  });

  it("applies the chain rule ∂J/∂x = reference · ∂J/∂value, so a directional derivative is the same in both variables", () => {
    const random = seededRandom(2);
    const gv = { vs: random.fillGaussian(new Float64Array(n)), vp: random.fillGaussian(new Float64Array(n)), rho: random.fillGaussian(new Float64Array(n)) };
    const g = gradientToVector(gv, "vs-vp-rho", ref, n);
    const dx = random.fillGaussian(new Float64Array(3 * n));
    // δvalue = reference · δx, so Σ ∂J/∂value·δvalue = Σ ∂J/∂x·δx.
    let inX = 0;
    let inValue = 0;
    for (let i = 0; i < n; i++) {
      inX += g[i] * dx[i] + g[n + i] * dx[n + i] + g[2 * n + i] * dx[2 * n + i];
      inValue += gv.vs[i] * ref.vsMps * dx[i] + gv.vp[i] * ref.vpMps * dx[n + i] + gv.rho[i] * ref.rhoKgm3 * dx[2 * n + i];
    }
    expect(inX).toBeCloseTo(inValue, 8);
    const back = vectorToGradients(g, "vs-vp-rho", ref, n);
    for (let i = 0; i < n; i++) expect(back.vs![i]).toBeCloseTo(gv.vs[i], 12);
    expect(() => gradientToVector({ vs: gv.vs }, "vs-vp", ref, n)).toThrow(/gradients.vp/);
  });
});

describe("bounds by projection", () => {
  it("refuses minVpVsRatio below √2 (λ = ρ(Vp² − 2Vs²) < 0) and bounds with no feasible model", () => {
    expect(() => checkBoundsConsistent({ ...bounds, minVpVsRatio: 1.4 })).toThrow(/minVpVsRatio must be at least √2/);
    expect(() => checkBoundsConsistent({ ...bounds, vpMaxMps: 100 })).toThrow(/vpMaxMps/);
    expect(() => checkBoundsConsistent({ ...bounds, vsMaxMps: 50 })).toThrow(/vsMaxMps/);
  });

  it("refuses a starting model outside the bounds, naming the bound to change and the value to change it to", () => {
    const m = model(3);
    m.vs[13] = 60;
    expect(() => checkModelBounds(m, "vs", bounds)).toThrow(/Vs = 60 m\/s at x = 2\.5 m, z = 0\.5 m .*lower vsMinMps to 60 or less/);
    const m2 = model(3);
    m2.rho[4] = 2500;
    expect(() => checkModelBounds(m2, "vs", bounds)).not.toThrow(); // density not inverted
    expect(() => checkModelBounds(m2, "vs-vp-rho", bounds)).toThrow(/raise rhoMaxKgm3 to 2500 or more/);
    const m3 = model(3);
    m3.vp[7] = m3.vs[7] * 1.5;
    expect(() => checkModelBounds(m3, "vs", bounds)).toThrow(/Vp\/Vs = 1\.5 .*lower minVpVsRatio to 1\.5 or less/);
    m3.vp[7] = m3.vs[7] * 1.3;
    expect(() => checkModelBounds(m3, "vs", bounds)).toThrow(/below √2 .*fix the starting model/);
  });

  it("returns feasible points, leaves feasible points unchanged and is idempotent (properties of a projection)", () => {
    const random = seededRandom(7);
    const tol = 1e-9; // relative: reference scaling rounds once each way
    for (const set of ["vs", "vs-vp", "vs-vp-rho"] as const) {
      const base = model(5);
      checkModelBounds(base, set, bounds);
      const ref = referenceValues(base);
      const fixed = new Uint8Array(n);
      fixed[0] = fixed[9] = 1;
      const project = vectorProjection(set, ref, bounds, base, fixed);
      const start = modelToVector(base, set, ref);
      const same = start.slice();
      project(same);
      expect(same).toEqual(start);
      for (let trial = 0; trial < 50; trial++) {
        const x = start.map((v) => v * (1 + 1.5 * random.gaussian()));
        project(x);
        const once = x.slice();
        project(x);
        expect(x).toEqual(once);
        const mdl = vectorToModel(x, set, ref, base);
        for (let i = 0; i < n; i++) {
          if (fixed[i]) {
            expect([mdl.vs[i], mdl.vp[i], mdl.rho[i]]).toEqual([base.vs[i], base.vp[i], base.rho[i]]);
            continue;
          }
          expect(mdl.vs[i]).toBeGreaterThanOrEqual(bounds.vsMinMps * (1 - tol));
          expect(mdl.vs[i]).toBeLessThanOrEqual(bounds.vsMaxMps * (1 + tol));
          expect(mdl.vp[i] / mdl.vs[i]).toBeGreaterThanOrEqual(bounds.minVpVsRatio * (1 - 1e-6)); // float32 model
          if (set !== "vs") {
            expect(mdl.vp[i]).toBeGreaterThanOrEqual(bounds.vpMinMps * (1 - tol));
            expect(mdl.vp[i]).toBeLessThanOrEqual(bounds.vpMaxMps * (1 + tol));
          } else expect(mdl.vp[i]).toBe(base.vp[i]);
          if (set === "vs-vp-rho") {
            expect(mdl.rho[i]).toBeGreaterThanOrEqual(bounds.rhoMinKgm3 * (1 - tol));
            expect(mdl.rho[i]).toBeLessThanOrEqual(bounds.rhoMaxKgm3 * (1 + tol));
          } else expect(mdl.rho[i]).toBe(base.rho[i]);
        }
      }
    }
  });

  it("resolves the ratio bound by raising Vp, or by lowering Vs at the Vp ceiling or when Vp is fixed", () => {
    expect(projectCell(300, 400, 2000, bounds, true, false)).toEqual([300, 480, 2000]);
    expect(projectCell(380, 500, 2000, bounds, true, false)).toEqual([380, 380 * 1.6, 2000]);
    // r·Vs = 624 passes a 600 m/s ceiling: Vp = 600 and Vs = 600/1.6 = 375.
    expect(projectCell(390, 500, 2000, { ...bounds, vpMaxMps: 600 }, true, false)).toEqual([375, 600, 2000]);
    expect(projectCell(300, 400, 2300, bounds, true, true)).toEqual([300, 480, 2300]);
    expect(projectCell(300, 480, 2400, bounds, true, true)).toEqual([300, 480, 2300]);
    expect(projectCell(300, 400, 2000, bounds, false, false)).toEqual([250, 400, 2000]);
  });

  it("keeps L-BFGS iterates feasible on a problem whose minimiser lies outside the bounds", async () => {
    const base = model(6);
    const ref = referenceValues(base);
    const project = vectorProjection("vs-vp", ref, bounds, base);
    // Pull Vs towards 600 m/s (above vsMax) and Vp towards 100 m/s (below vpMin and below r·Vs).
    const target = new Float64Array(2 * n);
    for (let i = 0; i < n; i++) {
      target[i] = 600 / ref.vsMps;
      target[n + i] = 100 / ref.vpMps;
    }
    const { state } = await minimiseLbfgs(modelToVector(base, "vs-vp", ref), async (x) => {
      let f = 0;
      const g = new Float64Array(x.length);
      for (let i = 0; i < x.length; i++) {
        f += 0.5 * (x[i] - target[i]) ** 2;
        g[i] = x[i] - target[i];
      }
      return { f, g };
    }, { project, maxIterations: 40, initialStep: 0.1 });
    const m = vectorToModel(state.x, "vs-vp", ref, base);
    for (let i = 0; i < n; i++) {
      expect(m.vs[i]).toBeLessThanOrEqual(400 * (1 + 1e-6));
      expect(m.vp[i] / m.vs[i]).toBeGreaterThanOrEqual(1.6 * (1 - 1e-6));
    }
  });
});
