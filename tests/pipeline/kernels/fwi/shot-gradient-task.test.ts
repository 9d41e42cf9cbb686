/** The per-shot gradient as a worker-pool task: same result as in this thread, arrays moved back. */
import { afterAll, describe, expect, it } from "vitest";
import { shotGradient, type ShotGradientInput } from "../../../../pipeline/kernels/fwi/shot-gradient";
import { buildModel } from "../../../../pipeline/kernels/fd/model-grid";
import { simulateShot } from "../../../../pipeline/kernels/fd/simulation";
import { createWorkerPool } from "../../../../pipeline/workers/pool";

const pool = createWorkerPool(1);
afterAll(() => pool.close());

describe("shotGradientTask", () => {
  it("returns from a worker exactly what shotGradient returns here (same kernel, same float32 operations)", async () => {
    const model = buildModel({ originX: 0, originZ: 0, spacingM: 0.5, nx: 40, nz: 24 }, [{ topM: 0, vp: 450, vs: 200, rho: 1800, vsGradient: 8 }]);
    const truth = { ...model, vs: model.vs.map((v, k) => (k % 40 > 20 && k / 40 < 8 ? v + 30 : v)) };
    const shot = { sourceX: 3, sourceZ: 0, receiverX: [6, 8, 10, 12, 14, 16], receiverZ: [0, 0, 0, 0, 0, 0] };
    const simulation = { mode: "sh" as const, sourceKind: "force-y" as const, component: "y" as const, wavelet: { kind: "ricker" as const, peakHz: 30 }, pmlCells: 8 };
    const output = { intervalS: 0.0005, count: 160, startTimeS: 0 };
    const observed = simulateShot(truth, shot, { ...simulation, output }).traces;
    const input: ShotGradientInput = { model, shot, simulation, output, observed, measure: "least-squares", wantGradient: true };
    const here = shotGradient(input);
    const there = await pool.run("shotGradientTask", input);
    expect(there.misfit).toBe(here.misfit);
    expect(there.synthetic).toBeInstanceOf(Float32Array);
    expect(Array.from(there.synthetic)).toEqual(Array.from(here.synthetic));
    expect(Array.from(there.gradient!.vs)).toEqual(Array.from(here.gradient!.vs));
    expect(Array.from(there.gradient!.rho)).toEqual(Array.from(here.gradient!.rho));
    expect(Array.from(there.illumination!)).toEqual(Array.from(here.illumination!));
    expect([there.forwardSolves, there.adjointSolves, there.storedWavefieldBytes]).toEqual([1, 1, here.storedWavefieldBytes]);
  }, 60_000);
});
