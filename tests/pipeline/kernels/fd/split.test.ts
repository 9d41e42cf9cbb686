/**
 * The solver in pieces (set-up, injection, time loop with hooks, read-out, resampling): the
 * chained pieces give the traces of the single function they replaced, bit for bit, and the
 * transpose of the resampling is the transpose of the linear map (dot-product test).
 */
import { describe, expect, it } from "vitest";
import {
  inject,
  prepareSimulation,
  receiverStencil,
  recordReceivers,
  resampleRecords,
  resampleRecordsTranspose,
  runTimeSteps,
  simulateShot,
  sourceInjection,
  sourceTimeFunction,
  type SimulationOptions,
} from "../../../../pipeline/kernels/fd/simulation";
import { buildModel } from "../../../../pipeline/kernels/fd/model-grid";
import { mulberry32 } from "../../../helpers/random";

/** FNV-1a (32 bit) over the bytes of a float32 array: a fingerprint of exact samples. */
function fnv1a(a: Float32Array): string {
  const b = new Uint8Array(a.buffer, a.byteOffset, a.byteLength);
  let h = 0x811c9dc5;
  for (let i = 0; i < b.length; i++) {
    h ^= b[i];
    h = Math.imul(h, 0x01000193) >>> 0;
  }
  return h.toString(16).padStart(8, "0");
}

const model = buildModel({ originX: 0, originZ: 0, spacingM: 0.5, nx: 48, nz: 24 }, [
  { topM: 0, vp: 600, vs: 200, rho: 1800, vsGradient: 8 },
  { topM: 6, vp: 1500, vs: 320, rho: 2000 },
]);
const shot = { sourceX: 6.3, sourceZ: 0, receiverX: [2, 9.25, 14.5, 20.1], receiverZ: [0, 0, 0.3, 1.1] };
const base: SimulationOptions = {
  mode: "psv",
  sourceKind: "force-z",
  wavelet: { kind: "ricker", peakHz: 30 },
  pmlCells: 10,
  output: { intervalS: 0.00025, count: 160, startTimeS: -0.002 },
};

describe("solver pieces", () => {
  it("give the traces and snapshots of the single-function solver they replaced, bit for bit", () => {
    // Fingerprints recorded with the solver before it was split into pieces (commit 9a4de86, the
    // same model, shot and settings); any change of a float32 operation or its order changes them.
    const cases: Array<[Partial<SimulationOptions>, string, string?]> = [
      [{}, "53060ccd"],
      [{ sourceKind: "explosive", kernel: "reference", component: "x" }, "da880ca6"],
      [{ sourceKind: "force-x", freeSurface: false, snapshotTimesS: [0.01, 0.02] }, "e6307d93", "2f917d8d"],
      [{ mode: "sh", sourceKind: "force-y", pmlSmoothingCells: 4 }, "ea812aae"],
    ];
    for (const [o, traces, frames] of cases) {
      const r = simulateShot(model, shot, { ...base, ...o });
      expect(fnv1a(r.traces)).toBe(traces);
      if (frames) expect(fnv1a(r.snapshots!.frames)).toBe(frames);
    }
  });

  it("chained by hand reproduce simulateShot exactly", () => {
    const opts: SimulationOptions = { ...base, mode: "sh", sourceKind: "force-y" };
    const setup = prepareSimulation(model, shot, opts);
    const src = sourceInjection(setup, shot.sourceX, shot.sourceZ);
    const stf = sourceTimeFunction(setup, opts.wavelet, src.atStress);
    const rec = receiverStencil(setup, shot.receiverX, shot.receiverZ);
    const raw = new Float32Array(4 * setup.steps);
    runTimeSteps(setup.kernel, setup.steps, {
      beforeStep: (n) => inject(setup.mem, src, stf[n]),
      afterStep: (n) => recordReceivers(setup.mem, rec, raw, n, setup.steps),
    });
    const traces = resampleRecords(raw, 4, setup.steps, setup.dt, setup.output);
    expect(Array.from(traces)).toEqual(Array.from(simulateShot(model, shot, opts).traces));
  });

  it("resample with a transpose that passes the dot-product test", () => {
    // ⟨R x, y⟩ = ⟨x, Rᵀ y⟩ for random x and y (the dot-product test of a linear operator and its
    // adjoint; Claerbout 1992, Earth Soundings Analysis: Processing versus Inversion; common practice). Both sums in float64 of the same
    // weights: agreement to 1e-12 relative.
    const rnd = mulberry32(11);
    const nrec = 3;
    const steps = 700;
    const dt = 0.000113;
    for (const output of [
      { intervalS: 0.00025, count: 300, startTimeS: -0.002 },
      { intervalS: 0.00005, count: 900, startTimeS: 0.001 },
    ]) {
      const x = Float32Array.from({ length: nrec * steps }, () => rnd() - 0.5);
      const y = Float64Array.from({ length: nrec * output.count }, () => rnd() - 0.5);
      const rx = resampleRecords(x, nrec, steps, dt, output);
      const rty = resampleRecordsTranspose(y, nrec, steps, dt, output);
      let a = 0;
      let b = 0;
      let scale = 0;
      // The forward map rounds its output to float32; compare against the same sum in float64.
      const rx64 = new Float64Array(rx.length);
      for (let k = 0; k < rx.length; k++) rx64[k] = rx[k];
      for (let k = 0; k < y.length; k++) a += rx64[k] * y[k];
      for (let k = 0; k < x.length; k++) {
        b += x[k] * rty[k];
        scale += Math.abs(x[k] * rty[k]);
      }
      // float32 rounding of R x: relative 6e-8 per sample.
      expect(Math.abs(a - b)).toBeLessThan(1e-6 * scale);
    }
  });
});
