/**
 * The WebAssembly kernel against the TypeScript reference kernel (the readable specification of
 * the scheme): same float32 operations in the same order, so the wavefields must agree bit for bit
 * (IEEE 754 single precision; rounding each JavaScript operation with Math.fround gives the single
 * result because binary64 carries more than 2·24+2 bits — Figueroa 1995, "When is double rounding
 * innocuous?").
 */
import { describe, expect, it } from "vitest";
import { simulateShot, timeKernelSteps, type SimulationOptions } from "../../../../pipeline/kernels/fd/simulation";
import { buildModel } from "../../../../pipeline/kernels/fd/model-grid";
import { planLayout } from "../../../../pipeline/kernels/fd/layout";
import { mulberry32 } from "../../../helpers/random";

function randomModel(seed: number, nx: number, nz: number) {
  const rnd = mulberry32(seed);
  const m = buildModel({ originX: -3, originZ: 0, spacingM: 0.5, nx, nz }, [{ topM: 0, vp: 900, vs: 300, rho: 1800 }]);
  for (let k = 0; k < nx * nz; k++) {
    m.vs[k] = 150 + 250 * rnd();
    m.vp[k] = m.vs[k] * (1.6 + rnd());
    m.rho[k] = 1500 + 700 * rnd();
  }
  return m;
}

describe("WebAssembly kernel", () => {
  // Grid widths that are and are not multiples of the SIMD width (4), with and without PML and free surface.
  const cases: Array<{ mode: "psv" | "sh"; kind: SimulationOptions["sourceKind"]; nx: number; fs: boolean; pml: number }> = [
    { mode: "psv", kind: "force-z", nx: 45, fs: true, pml: 8 },
    { mode: "psv", kind: "explosive", nx: 42, fs: true, pml: 6 },
    { mode: "psv", kind: "force-x", nx: 40, fs: false, pml: 7 },
    // Interiors between the absorbing strips of 3 and 0 columns past whole groups of four
    // (43 + 2·8 - 2·12 = 35; 40 + 2·8 - 2·12 = 32), the strips' own loops beside them.
    { mode: "psv", kind: "force-z", nx: 43, fs: false, pml: 8 },
    { mode: "psv", kind: "explosive", nx: 40, fs: true, pml: 8 },
    { mode: "sh", kind: "force-y", nx: 43, fs: true, pml: 8 },
    { mode: "sh", kind: "force-y", nx: 41, fs: false, pml: 0 },
  ];
  for (const c of cases) {
    it(`matches the reference kernel exactly: ${c.mode} ${c.kind}, nx ${c.nx}, free surface ${c.fs}, PML ${c.pml}`, () => {
      const model = randomModel(c.nx, c.nx, 31);
      const opts: SimulationOptions = {
        mode: c.mode, sourceKind: c.kind, wavelet: { kind: "ricker", peakHz: 25 }, pmlCells: c.pml, freeSurface: c.fs,
        output: { intervalS: 0.001, count: 150, startTimeS: -0.005 }, snapshotTimesS: [0.06],
      };
      const shot = { sourceX: 4.3, sourceZ: c.kind === "explosive" ? 0.7 : 1.2, receiverX: [-2.5, 0.3, 7.7, 15.9], receiverZ: [0, 0.2, 3.3, 10.1] };
      const a = simulateShot(model, shot, { ...opts, kernel: "wasm" });
      const b = simulateShot(model, shot, { ...opts, kernel: "reference" });
      let peak = 0;
      for (const v of a.traces) peak = Math.max(peak, Math.abs(v));
      expect(peak).toBeGreaterThan(0);
      expect(Number.isFinite(peak)).toBe(true);
      expect(Array.from(a.traces)).toEqual(Array.from(b.traces));
      expect(Array.from(a.snapshots!.frames)).toEqual(Array.from(b.snapshots!.frames));
      // Flush to zero: no stored magnitude between 0 and 2^-100 (ahead of the front the values
      // would otherwise decay through the float32 subnormals, below 2^-126 by IEEE 754).
      const tiny = Array.from(a.snapshots!.frames).filter((v) => v !== 0 && Math.abs(v) < 2 ** -100);
      expect(tiny).toEqual([]);
    });
  }

  for (const freeSurface of [true, false]) {
    it(`stays stable over many steps in a layered model with a soft body (free surface ${freeSurface})`, () => {
      // A stable scheme at dt = 0.9 of the Courant limit (Levander 1988) keeps the fields bounded;
      // with absorbing sides and bottom the late field must have decayed far below the early peak.
      // The layers (a water-table jump of Vp from 400 to 1600 m/s) and the body cross the absorbing strips.
      const model = buildModel(
        { originX: -10, originZ: 0, spacingM: 0.5, nx: 121, nz: 41 },
        [
          { topM: 0, vp: 400, vs: 140, rho: 1700, vsGradient: 12, rhoGradient: 20 },
          { topM: 4, vp: 1600, vs: 188, rho: 1850, vsGradient: 12, rhoGradient: 10 },
        ],
        [{ kind: "ellipse", centerXM: 27, centerZM: 0, radiusXM: 3, radiusZM: 3.5, vp: 250, vs: 90, rho: 1500 }],
      );
      const n = 4000;
      const res = simulateShot(model, { sourceX: 5, sourceZ: 0, receiverX: [-5, 20, 47], receiverZ: [0, 0, 0] }, {
        mode: "psv", sourceKind: "force-z", freeSurface, wavelet: { kind: "ricker", peakHz: 15 }, pmlCells: 20,
        output: { intervalS: 0.001, count: n, startTimeS: 0 },
      });
      let early = 0;
      let late = 0;
      for (let r = 0; r < 3; r++) {
        for (let k = 0; k < n; k++) {
          const v = Math.abs(res.traces[r * n + k]);
          if (k < 500) early = Math.max(early, v);
          else if (k > 3500) late = Math.max(late, v);
        }
      }
      expect(res.steps).toBeGreaterThan(20000);
      expect(late).toBeLessThan(1e-4 * early);
    });
  }

  it("stays stable in a model rough cell by cell when the absorbing strips average the medium along the boundary", () => {
    // Independent random Vp, Vs, density per cell reaching into the PML, with a free surface: with
    // pmlSmoothingCells 8 the late field has decayed far below the early peak.
    const model = randomModel(7, 60, 30);
    const n = 3000;
    const res = simulateShot(model, { sourceX: 10, sourceZ: 0, receiverX: [5, 20], receiverZ: [0, 0] }, {
      mode: "psv", sourceKind: "force-z", wavelet: { kind: "ricker", peakHz: 25 }, pmlCells: 10, pmlSmoothingCells: 8,
      output: { intervalS: 0.001, count: n, startTimeS: 0 },
    });
    let early = 0;
    let late = 0;
    for (let r = 0; r < 2; r++) {
      for (let k = 0; k < n; k++) {
        const v = Math.abs(res.traces[r * n + k]);
        if (k < 300) early = Math.max(early, v);
        else if (k > 2500) late = Math.max(late, v);
      }
    }
    expect(late).toBeLessThan(1e-4 * early);
  });

  it("times steps for the bench", () => {
    const r = timeKernelSteps({ mode: "psv", nx: 64, nz: 32, steps: 10, pmlCells: 5 });
    expect(r.seconds).toBeGreaterThan(0);
    expect(r.computationalCells).toBe((64 + 10) * (32 + 5));
  });
});

describe("layout", () => {
  it("pads rows to the SIMD width and keeps arrays 16-byte aligned", () => {
    const L = planLayout({ mode: "psv", modelNx: 45, modelNz: 20, pmlCells: 8, freeSurface: true, baseByte: 1000 });
    expect(L.nx).toBe(61);
    expect(L.nxv).toBe(64);
    expect(L.nrows).toBe(28);
    for (const off of Object.values(L.offsets)) expect((off * 4) % 16).toBe(0);
    expect(L.offsets.f4).toBeGreaterThan(0);
    const sh = planLayout({ mode: "sh", modelNx: 45, modelNz: 20, pmlCells: 8, freeSurface: false });
    expect(sh.offsets.f3).toBe(0);
    expect(sh.nrows).toBe(36);
    expect(() => planLayout({ mode: "sh", modelNx: 7, modelNz: 20, pmlCells: 8, freeSurface: false })).toThrow(/modelNx must be an integer ≥ 8/);
    // Absorbing strips span whole groups of four columns.
    expect(L.wx).toBe(12);
  });
});
