/**
 * Refusals before any time step (stability, accuracy, unphysical cells) and the wavelet facts the
 * accuracy check relies on.
 */
import { describe, expect, it } from "vitest";
import { STABILITY_FACTOR, checkGridAccuracy, checkModelCells, chooseTimeStep, maxStableDt } from "../../../../pipeline/kernels/fd/checks";
import { simulateShot, type SimulationOptions } from "../../../../pipeline/kernels/fd/simulation";
import { buildModel } from "../../../../pipeline/kernels/fd/model-grid";
import { ricker, waveletBand } from "../../../../pipeline/kernels/fd/wavelet";
import { FdSetupError } from "../../../../pipeline/kernels/fd/errors";

const model = () => buildModel({ originX: 0, originZ: 0, spacingM: 0.5, nx: 40, nz: 20 }, [{ topM: 0, vp: 600, vs: 200, rho: 1800 }]);
const shot = { sourceX: 5, sourceZ: 0, receiverX: [10], receiverZ: [0] };
const base: SimulationOptions = { mode: "psv", sourceKind: "force-z", wavelet: { kind: "ricker", peakHz: 30 }, output: { intervalS: 0.001, count: 50, startTimeS: 0 } };

describe("stability limit", () => {
  it("is 0.606·dx/vmax for the fourth-order staggered scheme", () => {
    // Levander (1988): dt ≤ dx / (√2 · vmax · (9/8 + 1/24)) ≈ 0.606 dx / vmax.
    expect(STABILITY_FACTOR).toBeCloseTo(0.6061, 4);
    expect(maxStableDt(1, 1000)).toBeCloseTo(6.061e-4, 7);
  });

  it("refuses an unstable dt, naming dtS and the largest stable value", () => {
    expect(() => chooseTimeStep(0.5, 600, 0.001)).toThrow(FdSetupError);
    expect(() => simulateShot(model(), shot, { ...base, dtS: 0.001 })).toThrow(/dtS = 0\.001 s is unstable.*set dtS to at most 0\.000505/);
    // A stable request is kept as given; automatic steps are 0.9 of the limit, fitted to the output interval.
    expect(chooseTimeStep(0.5, 600, 0.0004)).toBe(0.0004);
    const auto = chooseTimeStep(0.5, 600, undefined, 0.001);
    expect(auto).toBeLessThanOrEqual(0.9 * maxStableDt(0.5, 600));
    expect(Number.isInteger(Math.round(0.001 / auto * 1e9) / 1e9)).toBe(true);
  });
});

describe("accuracy check", () => {
  it("refuses a grid with fewer than 5 points per shortest S wavelength, saying what spacing would do", () => {
    // Vs 200 m/s at 2.4·30 Hz = 72 Hz: λ = 2.78 m; 0.5 m spacing gives 5.56 points (passes at 5, fails at 6).
    expect(() => simulateShot(model(), shot, { ...base, minPointsPerWavelength: 6 })).toThrow(/Grid too coarse.*Set spacingM to at most 0\.46/);
    expect(() => checkGridAccuracy(1, 200, 100, 5)).toThrow(/spacingM to at most 0\.4 m/);
    expect(checkGridAccuracy(0.25, 200, 100, 5)).toBeCloseTo(8, 10);
  });

  it("takes the highest frequency of a Ricker wavelet where its spectrum falls to 5 % of the peak", () => {
    // Ricker amplitude spectrum ∝ (f/fp)² exp(−(f/fp)²) (Ricker 1953): peak at fp; it falls to 5 %
    // of the peak where r² e^{1−r²} = 0.05, r = f/fp ≈ 2.401 (solved by bisection below).
    let lo = 1.5;
    let hi = 4;
    for (let k = 0; k < 60; k++) {
      const mid = (lo + hi) / 2;
      if (mid * mid * Math.exp(1 - mid * mid) > 0.05) lo = mid;
      else hi = mid;
    }
    const band = waveletBand({ kind: "ricker", peakHz: 30 });
    // Spectral grid spacing 5·30/512 ≈ 0.3 Hz bounds the error.
    expect(Math.abs(band.peakHz - 30)).toBeLessThan(0.3);
    expect(Math.abs(band.maxHz - lo * 30)).toBeLessThan(0.3);
    // The same from samples of the wavelet (an artifact wavelet), 0.25 ms apart.
    const samples = Float32Array.from({ length: 400 }, (_, k) => ricker(k * 0.00025, 30, 0.04));
    const fromSamples = waveletBand({ kind: "samples", samples, intervalS: 0.00025, startTimeS: 0 });
    expect(Math.abs(fromSamples.maxHz - lo * 30)).toBeLessThan(2.5);
  });
});

describe("unphysical cells", () => {
  it.each([
    ["vs", -10, /Vs = -10 m\/s at cell \(column 7, row 3\) at x = 3\.5 m, z = 1\.5 m/],
    ["vs", 0, /Vs = 0 m\/s at cell \(column 7, row 3\)/],
    ["vp", 250, /Vp\/Vs = 1\.25 .* at cell \(column 7, row 3\)/],
    ["rho", 0, /density = 0 kg\/m³ at cell \(column 7, row 3\)/],
  ] as const)("refuses %s = %d with the cell position", (field, value, message) => {
    const m = model();
    m[field][3 * m.nx + 7] = value;
    expect(() => checkModelCells(m)).toThrow(message);
    expect(() => simulateShot(m, shot, base)).toThrow(message);
  });

  it("refuses Vp/Vs at √2 (λ = 0) but accepts the next representable Vp above", () => {
    // λ = ρ(Vp² − 2Vs²) must be positive: Vp/Vs > √2 (Aki & Richards; common practice).
    // √2·Vs is irrational, so the boundary itself is the pair of adjacent float32 values around it
    // (the model stores float32): the last one at or below √2·Vs and the first one above. For
    // float32 values, Vp² and 2Vs² are exact in float64 (24-bit significands, 48-bit products), so
    // the sign of Vp² − 2Vs² below is exact and independent of the checker.
    const vs = 200;
    let below = Math.fround(Math.SQRT2 * vs);
    if (below * below - 2 * vs * vs > 0) below = nextFloat32Down(below);
    const above = nextFloat32Up(below);
    expect(below * below - 2 * vs * vs).toBeLessThanOrEqual(0);
    expect(above * above - 2 * vs * vs).toBeGreaterThan(0);
    const m = model();
    m.vp[0] = below;
    expect(m.vp[0]).toBe(below);
    expect(() => checkModelCells(m)).toThrow(/Vp\/Vs = 1\.414.*at cell \(column 0, row 0\)/);
    m.vp[0] = above;
    expect(checkModelCells(m).vsMin).toBe(200);
  });

  it("refuses sources and receivers outside the model", () => {
    expect(() => simulateShot(model(), { ...shot, receiverX: [25] }, base)).toThrow(/Receiver 1 at x = 25 m.*outside the model/);
    expect(() => simulateShot(model(), { ...shot, sourceZ: -1 }, base)).toThrow(/The source .* outside the model/);
  });
});

/** The float32 value just below / above a float32 value `x` > 0 (IEEE 754 binary32: adjacent bit patterns). */
function nextFloat32Down(x: number): number {
  const f = new Float32Array([x]);
  const u = new Uint32Array(f.buffer);
  u[0] -= 1;
  return f[0];
}
function nextFloat32Up(x: number): number {
  const f = new Float32Array([x]);
  const u = new Uint32Array(f.buffer);
  u[0] += 1;
  return f[0];
}
