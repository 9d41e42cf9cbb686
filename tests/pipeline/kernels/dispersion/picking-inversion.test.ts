import { describe, expect, it } from "vitest";
import { pickDispersionCurve } from "../../../../pipeline/kernels/dispersion/picking";
import { evenAxis, phaseShiftImage } from "../../../../pipeline/kernels/dispersion/phase-shift";
import { densityFromRule, invertDispersionCurve, layeredFromVs, solveSymmetric, vpFromPoisson } from "../../../../pipeline/kernels/dispersion/inversion";
import { rayleighDispersion } from "../../../../pipeline/kernels/dispersion/rayleigh";
import { profilesToModel } from "../../../../pipeline/kernels/dispersion/profile-section";
import { buildModel } from "../../../../pipeline/kernels/fd/model-grid";
import { seededRandom } from "../../../helpers/random";

/** An image `[frequency][velocity]` with Gaussian ridges along given curves plus seeded noise. */
function ridgeImage(f: Float64Array, c: Float64Array, ridges: Array<{ curve: (f: number) => number; height: number; widthMps: number }>, noise: number, seed: number): Float32Array {
  const rnd = seededRandom(seed);
  const img = new Float32Array(f.length * c.length);
  for (let q = 0; q < f.length; q++) {
    for (let j = 0; j < c.length; j++) {
      let v = noise * rnd.uniform();
      for (const r of ridges) v += r.height * Math.exp(-0.5 * ((c[j] - r.curve(f[q])) / r.widthMps) ** 2);
      img[q * c.length + j] = v;
    }
  }
  return img;
}

describe("automatic dispersion picking", () => {
  const f = evenAxis(5, 60, 1, "frequency");
  const c = evenAxis(80, 500, 4, "velocity");
  const fundamental = (x: number) => 150 + 250 * Math.exp(-x / 10);
  const options = { minVelocityMps: 80, maxVelocityMps: 500, minFrequencyHz: 5, maxFrequencyHz: 60, maxStepFraction: 0.15, minRelativeValue: 0.5 };

  it("follows a ridge within a quarter of the velocity step (parabolic refinement of a symmetric peak)", () => {
    const img = ridgeImage(f, c, [{ curve: fundamental, height: 1, widthMps: 12 }], 0.02, 1);
    const p = pickDispersionCurve(img, f, c, options);
    // A Gaussian peak sampled every 4 m/s: the parabola through three samples lands within about
    // 0.5 m/s of the centre (bounded by the noise of 2 %); a quarter step (1 m/s) is the tolerance.
    f.forEach((fq, q) => expect(Math.abs(p.velocitiesMps[q] - fundamental(fq)), `${fq} Hz`).toBeLessThan(1));
  });

  it("keeps inside the bounds and does not jump to a stronger mode beyond the continuity limit", () => {
    // A stronger higher mode 60 to 100 m/s above the fundamental at high frequencies.
    const higher = (x: number) => fundamental(x) + 60 + 40 * Math.exp(-x / 30);
    const img = ridgeImage(f, c, [{ curve: fundamental, height: 1, widthMps: 10 }, { curve: higher, height: 1.5, widthMps: 10 }], 0.02, 2);
    // Bounds by the user: no pick below 8 Hz, none above 380 m/s.
    const bounded = pickDispersionCurve(img, f, c, { ...options, maxVelocityMps: 380, minFrequencyHz: 8 });
    f.forEach((fq, q) => {
      if (fq < 8) {
        expect(Number.isNaN(bounded.velocitiesMps[q])).toBe(true);
        return;
      }
      expect(bounded.velocitiesMps[q]).toBeLessThanOrEqual(380);
    });
    // Unbounded, the anchor sits on the stronger mode; both modes are continuous, so the pick
    // stays on one curve from end to end: never more than 15 % between neighbours.
    const free = pickDispersionCurve(img, f, c, options);
    for (let q = 1; q < f.length; q++) {
      if (Number.isFinite(free.velocitiesMps[q]) && Number.isFinite(free.velocitiesMps[q - 1])) {
        expect(Math.abs(free.velocitiesMps[q] / free.velocitiesMps[q - 1] - 1)).toBeLessThanOrEqual(0.15 + 1e-9);
      }
    }
  });

  it("with preferSlowest takes the slower of two clear modes even where the faster one is stronger", () => {
    const higher = (x: number) => fundamental(x) + 80;
    const img = ridgeImage(f, c, [{ curve: fundamental, height: 0.7, widthMps: 10 }, { curve: higher, height: 1, widthMps: 10 }], 0.02, 4);
    const strongest = pickDispersionCurve(img, f, c, options);
    const slowest = pickDispersionCurve(img, f, c, { ...options, preferSlowest: true });
    f.forEach((fq, q) => {
      expect(Math.abs(slowest.velocitiesMps[q] - fundamental(fq)), `${fq} Hz`).toBeLessThan(1.5);
      expect(Math.abs(strongest.velocitiesMps[q] - higher(fq)), `${fq} Hz`).toBeLessThan(1.5);
    });
  });

  it("stays above f × trace spacing, where a phase-shift image repeats a wave (spatial aliasing), and finds the repetition without that limit", () => {
    // One non-dispersive wave at 150 m/s recorded every 1 m from 2 to 25 m (a Ricker pulse of 45 Hz).
    // Stacked with trial phase shifts, traces dx apart cannot tell c from 1/c' = 1/c + n/(f·dx)
    // (sampling theorem: phases that differ by 2πn per trace); at 80 Hz the n = 1 repetition is at
    // 1/(1/150 + 1/80) = 52.2 m/s, inside a 50–800 m/s image, and it is the slowest peak.
    const dt = 0.00025;
    const ns = 1600;
    const dist = Array.from({ length: 24 }, (_, k) => 2 + k);
    const data = new Float64Array(dist.length * ns);
    dist.forEach((x, t) => {
      for (let k = 0; k < ns; k++) {
        const a = Math.PI * 45 * (k * dt - 0.05 - x / 150);
        data[t * ns + k] = (1 - 2 * a * a) * Math.exp(-a * a);
      }
    });
    const axes = { frequenciesHz: evenAxis(15, 80, 0.5, "frequency"), velocitiesMps: evenAxis(50, 800, 1, "velocity") };
    const image = phaseShiftImage([{ data, sampleCount: ns, sampleIntervalS: dt, startTimeS: 0, traceRows: dist.map((_, t) => t), distancesM: dist }], axes, true);
    const o = { minVelocityMps: 50, maxVelocityMps: 800, minFrequencyHz: 15, maxFrequencyHz: 80, maxStepFraction: 0.15, minRelativeValue: 0.5, preferSlowest: true };
    const last = axes.frequenciesHz.length - 1;
    const free = pickDispersionCurve(image, axes.frequenciesHz, axes.velocitiesMps, o);
    expect(Math.abs(free.velocitiesMps[last] - 1 / (1 / 150 + 1 / 80))).toBeLessThan(2);
    const bounded = pickDispersionCurve(image, axes.frequenciesHz, axes.velocitiesMps, { ...o, aliasSpacingM: 1 });
    axes.frequenciesHz.forEach((fq, q) => expect(Math.abs(bounded.velocitiesMps[q] - 150), `${fq} Hz`).toBeLessThan(3));
  });

  it("leaves frequencies without a clear peak unpicked and refuses bad settings", () => {
    const img = ridgeImage(f, c, [{ curve: fundamental, height: 1, widthMps: 10 }], 0, 3);
    // Blank out 30 and 31 Hz: a gap of two frequencies is bridged (default: stop after 3).
    const blank = (image: Float32Array, from: number, to: number) => {
      for (let q = 0; q < f.length; q++) if (f[q] >= from && f[q] <= to) image.fill(0, q * c.length, (q + 1) * c.length);
    };
    blank(img, 30, 31);
    const p = pickDispersionCurve(img, f, c, options);
    f.forEach((fq, q) => expect(Number.isNaN(p.velocitiesMps[q]), `${fq} Hz`).toBe(fq >= 30 && fq <= 31));
    // A gap of six frequencies ends the walk: beyond it nothing is picked on the side away from the anchor.
    const wide = ridgeImage(f, c, [{ curve: fundamental, height: 1, widthMps: 10 }], 0, 3);
    blank(wide, 30, 35);
    const q = pickDispersionCurve(wide, f, c, options);
    const picked = f.filter((_, i) => Number.isFinite(q.velocitiesMps[i]));
    expect(picked.every((fq) => fq < 30) || picked.every((fq) => fq > 35)).toBe(true);
    expect(picked.length).toBeGreaterThan(20);
    expect(() => pickDispersionCurve(img, f, c, { ...options, maxVelocityMps: 50 })).toThrow(/maxVelocityMps/);
    expect(() => pickDispersionCurve(img.subarray(1), f, c, options)).toThrow(/image has/);
  });
});

describe("inversion of a dispersion curve for a layered Vs profile", () => {
  const density = { rule: "constant" as const, kgPerM3: 1900 };
  const truth = layeredFromVs([160, 260, 420], [3, 6], 0.3, density);
  const f = Array.from({ length: 23 }, (_, i) => 5 + 2.5 * i);
  const observed = rayleighDispersion(truth, f);

  it("recovers a known 3-layer model from its own forward-modelled curve (thicknesses fixed)", () => {
    const r = invertDispersionCurve(f, observed, {
      thicknessM: [3, 6], freeThickness: false, poissonRatio: 0.3, density, minVsMps: 50, maxVsMps: 1500, maxIterations: 40, investigationFraction: 0.5,
    });
    // Noise-free data and the true parametrisation: within 1 % ("a few %" asked).
    Array.from(truth.vs).forEach((v, i) => expect(Math.abs(r.model.vs[i] / v - 1), `layer ${i}`).toBeLessThan(0.01));
    expect(r.rmsMisfitMps).toBeLessThan(0.05);
    expect(r.misfitHistoryMps[0]).toBeGreaterThan(r.rmsMisfitMps);
    // Depth of investigation: half the longest wavelength picked (common practice: a third to a half).
    const longest = Math.max(...f.map((x, i) => observed[i] / x));
    expect(r.longestWavelengthM).toBeCloseTo(longest, 9);
    expect(r.depthOfInvestigationM).toBeCloseTo(0.5 * longest, 9);
  });

  it("recovers it with free thicknesses from a wrong layering within a few per cent", () => {
    const r = invertDispersionCurve(f, observed, {
      thicknessM: [2, 8], freeThickness: true, poissonRatio: 0.3, density, minVsMps: 50, maxVsMps: 1500, maxIterations: 60, investigationFraction: 0.5,
    });
    Array.from(truth.vs).forEach((v, i) => expect(Math.abs(r.model.vs[i] / v - 1), `Vs of layer ${i}`).toBeLessThan(0.03));
    [3, 6].forEach((h, i) => expect(Math.abs(r.model.thicknessM[i] / h - 1), `thickness of layer ${i}`).toBeLessThan(0.05));
  });

  it("fits noisy picks to about the noise level", () => {
    const rnd = seededRandom(21);
    const sigma = 2;
    const noisy = Array.from(observed, (v) => v + sigma * rnd.gaussian());
    const r = invertDispersionCurve(f, noisy, {
      thicknessM: [3, 6], freeThickness: false, poissonRatio: 0.3, density, minVsMps: 50, maxVsMps: 1500, maxIterations: 40, investigationFraction: 0.5,
    });
    // Least squares with 3 unknowns and 23 picks: rms ≈ σ·√((23 − 3)/23) ≈ 1.9 m/s; allow 1 to 3 m/s.
    expect(r.rmsMisfitMps).toBeGreaterThan(1);
    expect(r.rmsMisfitMps).toBeLessThan(3);
    Array.from(truth.vs).slice(0, 2).forEach((v, i) => expect(Math.abs(r.model.vs[i] / v - 1), `layer ${i}`).toBeLessThan(0.03));
  });

  it("damping keeps a layer the curve cannot see near its starting value, at no cost to the fit", () => {
    // Picks from 15 Hz: the longest wavelength is about 17 m, the curve reaches ≈8 m; a fourth
    // layer from 30 m down lies far below, and the curve hardly depends on its Vs.
    const fHigh = f.filter((x) => x >= 15);
    const deep = layeredFromVs([160, 260, 420, 420], [3, 6, 21], 0.3, density);
    const data = rayleighDispersion(deep, fHigh);
    const start = [170, 250, 400, 900];
    const run = (dampingMps: number) =>
      invertDispersionCurve(fHigh, data, {
        thicknessM: [3, 6, 21], startVsMps: start, freeThickness: false, poissonRatio: 0.3, density, minVsMps: 50, maxVsMps: 3000, maxIterations: 40, investigationFraction: 0.5, dampingMps,
      });
    const damped = run(5);
    expect(Math.abs(damped.model.vs[3] / 900 - 1)).toBeLessThan(0.05);
    expect(damped.rmsMisfitMps).toBeLessThan(0.5);
    Array.from(deep.vs).slice(0, 2).forEach((v, i) => expect(Math.abs(damped.model.vs[i] / v - 1), `layer ${i}`).toBeLessThan(0.02));
  });

  it("sets Vp by Poisson's ratio and density by Gardner's rule", () => {
    // ν = 0.25 gives Vp = √3·Vs (Poisson solid, closed form).
    expect(vpFromPoisson(200, 0.25)).toBeCloseTo(200 * Math.sqrt(3), 9);
    // Gardner, Gardner & Gregory (1974): ρ = 0.31·V^0.25 g/cm³ with V in m/s; 2000 m/s → 2.073 g/cm³.
    expect(densityFromRule(2000, { rule: "gardner" })).toBeCloseTo(310 * 2000 ** 0.25, 9);
    expect(densityFromRule(2000, { rule: "gardner" }) / 1000).toBeCloseTo(2.073, 3);
    expect(() => vpFromPoisson(200, 0.5)).toThrow(/poissonRatio/);
    // Cholesky solve of a small SPD system against its known solution.
    const x = solveSymmetric(new Float64Array([4, 2, 2, 3]), new Float64Array([2, 1]), 2);
    expect(x[0]).toBeCloseTo(0.5, 12);
    expect(x[1]).toBeCloseTo(0, 12);
  });
});

describe("1D profiles into a 2D model", () => {
  it("interpolates linearly between profile positions, holds the ends, and continues below the depth of investigation", () => {
    const grid = { originX: 0, originZ: 0, spacingM: 1, nx: 21, nz: 16 };
    const a = { x: 5, thicknessM: [4, 0], vp: [400, 800], vs: [200, 400], rho: [1800, 2000], depthOfInvestigationM: 8 };
    const b = { x: 15, thicknessM: [2, 0], vp: [600, 1000], vs: [300, 500], rho: [1900, 2100], depthOfInvestigationM: 12 };
    const m = profilesToModel([b, a], grid);
    const at = (arr: Float32Array, x: number, z: number) => arr[z * grid.nx + x];
    expect(at(m.vs, 0, 1)).toBe(200);
    expect(at(m.vs, 20, 1)).toBe(300);
    expect(at(m.vs, 10, 1)).toBeCloseTo(250, 4);
    expect(at(m.vs, 10, 3)).toBeCloseTo(0.5 * 200 + 0.5 * 500, 4);
    expect(at(m.vs, 5, 15)).toBe(400);
    // With a background, cells below the interpolated depth of investigation (10 m at x = 10) keep it.
    const background = buildModel(grid, [{ topM: 0, vp: 1500, vs: 700, rho: 2200 }]);
    const blended = profilesToModel([a, b], grid, background);
    expect(at(blended.vs, 10, 10)).toBeCloseTo(450, 4);
    expect(at(blended.vs, 10, 11)).toBe(700);
    expect(() => profilesToModel([], grid)).toThrow(/profiles/);
  });
});
