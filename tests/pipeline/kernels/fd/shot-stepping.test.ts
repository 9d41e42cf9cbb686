/**
 * The forward time loop of a shot driven through the WebAssembly kernel's stepper (several steps
 * per call, sources and receivers handled inside the kernel) against the same loop run one kernel
 * step at a time with the sources and receivers handled in between, as the readable reference
 * kernel specifies it (pipeline/kernels/fd/reference-kernel.ts). Both perform the same IEEE 754
 * single-precision operations in the same order, so traces, snapshots and the wavefields read
 * mid-run must agree bit for bit (exact equality, no tolerance).
 */
import { describe, expect, it } from "vitest";
import {
  inject,
  prepareSimulation,
  receiverStencil,
  recordReceivers,
  runShotSteps,
  runTimeSteps,
  simulateShot,
  sourceInjection,
  sourceTimeFunction,
  type FdSetup,
  type SimulationOptions,
} from "../../../../pipeline/kernels/fd/simulation";
import { buildModel } from "../../../../pipeline/kernels/fd/model-grid";
import { mulberry32 } from "../../../helpers/random";

const model = buildModel({ originX: 0, originZ: 0, spacingM: 0.5, nx: 44, nz: 22 }, [
  { topM: 0, vp: 600, vs: 200, rho: 1800, vsGradient: 8 },
  { topM: 5, vp: 1500, vs: 320, rho: 2000 },
]);
const shot = { sourceX: 6.3, sourceZ: 0.2, receiverX: [0, 9.25, 14.5, 20.1, 21.5], receiverZ: [0, 0, 0.3, 1.1, 10.5] };
const base: SimulationOptions = {
  mode: "psv",
  sourceKind: "force-z",
  wavelet: { kind: "ricker", peakHz: 30 },
  pmlCells: 8,
  output: { intervalS: 0.00025, count: 120, startTimeS: -0.002 },
};

/** The fields of the buffer (velocities and stresses, halo rows included). */
function fields(setup: FdSetup): Float32Array {
  const o = setup.layout.offsets;
  return setup.mem.slice(o.f0, o.m0);
}

describe("shot stepping several steps per call", () => {
  it("gives the reference kernel's traces and snapshots bit for bit (force, explosive, SH; with and without free surface)", () => {
    const cases: Array<Partial<SimulationOptions>> = [
      { snapshotTimesS: [0.0031, 0.0123, 0.0124, 0.02] },
      { sourceKind: "explosive", component: "x", snapshotTimesS: [0.005] },
      { sourceKind: "explosive", freeSurface: false, snapshotTimesS: [0.011], snapshotComponent: "x" },
      { sourceKind: "force-x", freeSurface: false },
      { mode: "sh", sourceKind: "force-y", snapshotTimesS: [0.0077, 0.016] },
    ];
    for (const c of cases) {
      const stepped = simulateShot(model, shot, { ...base, ...c });
      const reference = simulateShot(model, shot, { ...base, ...c, kernel: "reference" });
      expect(stepped.steps).toBe(reference.steps);
      expect(stepped.steps % 64).not.toBe(0); // a last chunk shorter than 64 steps is exercised
      let peak = 0;
      for (const v of reference.traces) peak = Math.max(peak, Math.abs(v));
      expect(peak).toBeGreaterThan(0);
      expect(Array.from(stepped.traces)).toEqual(Array.from(reference.traces));
      if (c.snapshotTimesS) {
        expect(stepped.snapshots!.timesS).toEqual(reference.snapshots!.timesS);
        expect(Array.from(stepped.snapshots!.frames)).toEqual(Array.from(reference.snapshots!.frames));
      }
    }
  });

  it("hands over the wavefield after every wanted step exactly as stepping one step per call", () => {
    for (const [mode, sourceKind, every] of [["psv", "explosive", 7], ["sh", "force-y", 5]] as const) {
      const opts: SimulationOptions = { ...base, mode, sourceKind };
      const run = (stepper: boolean) => {
        const setup = prepareSimulation(model, shot, opts);
        const src = sourceInjection(setup, shot.sourceX, shot.sourceZ);
        const stf = sourceTimeFunction(setup, opts.wavelet, src.atStress);
        const rec = receiverStencil(setup, shot.receiverX, shot.receiverZ);
        const raw = new Float32Array(shot.receiverX.length * setup.steps);
        const seen: number[] = [];
        const kept: Float32Array[] = [];
        const visits = { wants: (n: number) => n % every === 0, visit: (n: number) => (seen.push(n), kept.push(fields(setup))) };
        if (stepper) {
          expect(setup.createStepper).toBeDefined();
          runShotSteps(setup, src, stf, rec, raw, visits);
        } else {
          runTimeSteps(setup.kernel, setup.steps, {
            beforeStep: (n) => (src.atStress ? n > 0 && inject(setup.mem, src, stf[n - 1]) : inject(setup.mem, src, stf[n])),
            afterStep(n) {
              recordReceivers(setup.mem, rec, raw, n, setup.steps);
              if (visits.wants(n)) visits.visit(n);
            },
          });
        }
        return { raw, seen, kept, steps: setup.steps };
      };
      const a = run(true);
      const b = run(false);
      expect(a.seen).toEqual(Array.from({ length: Math.ceil(a.steps / every) }, (_, k) => k * every));
      expect(a.seen).toEqual(b.seen);
      expect(Array.from(a.raw)).toEqual(Array.from(b.raw));
      for (let k = 0; k < a.kept.length; k++) expect(Array.from(a.kept[k])).toEqual(Array.from(b.kept[k]));
    }
  });

  it("takes more receiver cells than the stepper's default room (2048)", () => {
    // 700 receivers off the grid nodes: up to four read-out cells each, 2800 in all.
    const rnd = mulberry32(5);
    const receiverX = Array.from({ length: 700 }, () => 0.3 + 21 * rnd());
    const receiverZ = Array.from({ length: 700 }, () => 0.3 + 10 * rnd());
    const many = { ...shot, receiverX, receiverZ };
    const opts: SimulationOptions = { ...base, output: { intervalS: 0.0005, count: 30, startTimeS: 0 } };
    const setup = prepareSimulation(model, many, opts);
    expect(receiverStencil(setup, receiverX, receiverZ).index.length).toBeGreaterThan(2048);
    const stepped = simulateShot(model, many, opts);
    const reference = simulateShot(model, many, { ...opts, kernel: "reference" });
    expect(Array.from(stepped.traces)).toEqual(Array.from(reference.traces));
  });

  it("stores the steps done and reads the cancel flag every 64 steps", () => {
    const setup = prepareSimulation(model, shot, base);
    const src = sourceInjection(setup, shot.sourceX, shot.sourceZ);
    const stf = sourceTimeFunction(setup, base.wavelet, src.atStress);
    const rec = receiverStencil(setup, shot.receiverX, shot.receiverZ);
    const raw = new Float32Array(shot.receiverX.length * setup.steps);
    const flag = new Int32Array(new SharedArrayBuffer(4));
    const counter = new Int32Array(new SharedArrayBuffer(4));
    const stored: number[] = [];
    // The flag is raised after step 100; the next check, before step 128, stops the run.
    const visits = {
      wants: () => true,
      visit(n: number) {
        if (stored[stored.length - 1] !== Atomics.load(counter, 0)) stored.push(Atomics.load(counter, 0));
        if (n === 100) Atomics.store(flag, 0, 1);
      },
    };
    expect(() => runShotSteps(setup, src, stf, rec, raw, visits, flag, counter)).toThrow(expect.objectContaining({ name: "AbortError" }));
    expect(stored).toEqual([0, 64]);
    expect(Atomics.load(counter, 0)).toBe(128);
    // Uncancelled, simulateShot leaves the whole step count.
    const done = new Int32Array(new SharedArrayBuffer(4));
    const r = simulateShot(model, shot, { ...base, stepCounter: done });
    expect(Atomics.load(done, 0)).toBe(r.steps);
  });
});
