/**
 * Step forward-model: synthetic gathers in the layout of the field gathers, shots on the worker
 * pool, progress per shot, cancellation, pure-modelling spreads, snapshots, wavelets from a slot
 * and SEG-Y export.
 */
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { forwardModelStep } from "../../../pipeline/steps/forward-model";
import { buildModel } from "../../../pipeline/kernels/fd/model-grid";
import { simulateShot } from "../../../pipeline/kernels/fd/simulation";
import { modelShots } from "../../../pipeline/kernels/fd/model-shots";
import { ricker } from "../../../pipeline/kernels/fd/wavelet";
import { exportArtifact } from "../../../pipeline/export";
import { readSegy } from "../../../pipeline/io/segy";
import { createWorkerPool, type WorkerPool } from "../../../pipeline/workers/pool";
import type { GatherSet } from "../../../pipeline/types";
import { makeStepContext } from "../../helpers/step-context";
import { makeGather } from "./make-gather";

const model = buildModel({ originX: -4, originZ: 0, spacingM: 0.5, nx: 61, nz: 25 }, [
  { topM: 0, vp: 500, vs: 180, rho: 1800, vsGradient: 10 },
]);

function fieldGathers(): GatherSet {
  const g = (id: string, sourceX: number) =>
    makeGather({ id, traceCount: 12, sampleCount: 300, sampleIntervalS: 0.0005, startTimeS: -0.01, sourceX, firstReceiverX: 0, receiverSpacingM: 2 });
  return { kind: "gathers", gathers: [g("sp01", -1), g("sp02", 11), g("sp03", 23)] };
}

let pool: WorkerPool;
beforeAll(() => {
  pool = createWorkerPool(2);
});
afterAll(async () => {
  await pool.close();
});

describe("forward-model", () => {
  it("models every shot on the pool in the layout of the field gathers, reporting progress per shot", async () => {
    const gathers = fieldGathers();
    const ctx = makeStepContext({ pool });
    const p = forwardModelStep.params.parse({ rickerPeakHz: 25, pmlCells: 10 });
    const res = await forwardModelStep.run({ model, gathers }, p, ctx);
    const syn = res.outputs.synthetic!;
    expect(syn.gathers.map((g) => g.id)).toEqual(["sp01", "sp02", "sp03"]);
    for (let k = 0; k < 3; k++) {
      const f = gathers.gathers[k];
      const s = syn.gathers[k];
      expect([s.sampleIntervalS, s.sampleCount, s.startTimeS]).toEqual([f.sampleIntervalS, f.sampleCount, f.startTimeS]);
      expect(s.traces.map((t) => [t.receiverX, t.sourceX, t.channel])).toEqual(f.traces.map((t) => [t.receiverX, t.sourceX, t.channel]));
      expect(s.traces.every((t) => t.component === "z")).toBe(true);
      expect(s.data.length).toBe(f.traces.length * f.sampleCount);
    }
    // The worker result equals the same shot modelled here (same kernel, same float32 operations).
    const f2 = gathers.gathers[1];
    const direct = simulateShot(model, {
      sourceX: 11, sourceZ: 0, receiverX: f2.traces.map((t) => t.receiverX), receiverZ: f2.traces.map((t) => t.receiverZ),
    }, { mode: "psv", sourceKind: "force-z", wavelet: { kind: "ricker", peakHz: 25 }, pmlCells: 10, output: { intervalS: 0.0005, count: 300, startTimeS: -0.01 } });
    expect(Array.from(syn.gathers[1].data)).toEqual(Array.from(direct.traces));
    // Pre-trigger samples (t < 0) are quiet: the Ricker source starts near zero at t = 0. With its
    // centre at 1.2/f the Ricker's value at t = 0 is (1 - 2·1.44π²)·exp(-1.44π²) ≈ -1.8e-5 of its peak
    // (closed form of Ricker 1953), so 1e-4 of the trace peak leaves room for the solver's spreading.
    const pre = syn.gathers[1].data.subarray(0, 20);
    const peak = Math.max(...Array.from(syn.gathers[1].data, Math.abs));
    expect(Math.max(...Array.from(pre, Math.abs))).toBeLessThan(1e-4 * peak);
    expect(ctx.progressCalls.map((c) => c.fraction)).toEqual([1 / 3, 2 / 3, 1]);
    expect(res.summary).toMatchObject({ shots: 3, mode: "psv", sourceKind: "force-z" });

    // Exportable as SEG-Y like any gather set (SEG-Y rev 2.0 IEEE float keeps the samples exactly).
    const segy = readSegy(exportArtifact(syn, "segy"), "synthetic.sgy");
    expect(segy.traces.length).toBe(36);
    expect(Array.from(segy.traces[12].samples)).toEqual(Array.from(syn.gathers[1].data.subarray(0, 300)));
  });

  it("models a spread from the settings alone and keeps snapshots of one shot", async () => {
    const ctx = makeStepContext({ pool });
    const p = forwardModelStep.params.parse({
      mode: "sh", rickerPeakHz: 25, pmlCells: 10, snapshotTimesS: [0.02, 0.05], snapshotGatherId: "shot-02",
      spread: { sourceXM: [0, 20], firstReceiverXM: 1, receiverSpacingM: 1, receiverCount: 10, sampleIntervalS: 0.001, sampleCount: 100 },
    });
    const res = await forwardModelStep.run({ model }, p, ctx);
    const syn = res.outputs.synthetic!;
    expect(syn.gathers.map((g) => g.id)).toEqual(["shot-01", "shot-02"]);
    expect(syn.gathers[1].traces[3]).toMatchObject({ sourceX: 20, receiverX: 4, offset: -16, component: "y", channel: 4 });
    const snap = res.outputs.snapshots!;
    expect(snap).toMatchObject({ shotId: "shot-02", component: "vy", nx: 61, nz: 25 });
    expect(snap.frames.length).toBe(2 * 61 * 25);
    // At 0.05 s (wavelet centre 0.048 s) the largest motion is near the source at x = 20 m.
    let best = 0;
    let at = 0;
    for (let k = 61 * 25; k < 2 * 61 * 25; k++) {
      if (Math.abs(snap.frames[k]) > best) {
        best = Math.abs(snap.frames[k]);
        at = k - 61 * 25;
      }
    }
    // After 0.05 s a wave at the model's slowest speed has travelled a few metres; 3 m (six cells)
    // separates "near the source" from the other shot's position 10 m away (chosen, not sourced).
    expect(Math.abs(model.originX + (at % 61) * 0.5 - 20)).toBeLessThan(3);
  });

  it("uses a wavelet from the wavelet slot", async () => {
    // The Ricker wavelet sampled at 0.25 ms and handed over as an artifact gives the same traces as
    // the built-in Ricker up to the band-limited interpolation error (about 1e-3 of the peak).
    const samples = Float32Array.from({ length: 400 }, (_, k) => ricker(k * 0.00025, 25, 0.048));
    const wavelet: GatherSet = { kind: "gathers", gathers: [{ ...makeGather({ id: "w", traceCount: 1, sampleCount: 400, sampleIntervalS: 0.00025 }), data: samples }] };
    const gathers = { kind: "gathers" as const, gathers: fieldGathers().gathers.slice(0, 1) };
    const ctx = makeStepContext();
    const a = await forwardModelStep.run({ model, gathers, wavelet }, forwardModelStep.params.parse({ waveletFrom: "wavelet-slot", pmlCells: 10 }), ctx);
    const b = await forwardModelStep.run({ model, gathers }, forwardModelStep.params.parse({ rickerPeakHz: 25, timeShiftS: 0.048, pmlCells: 10 }), ctx);
    const da = a.outputs.synthetic!.gathers[0].data;
    const db = b.outputs.synthetic!.gathers[0].data;
    let diff = 0;
    let peak = 0;
    for (let k = 0; k < da.length; k++) {
      diff = Math.max(diff, Math.abs(da[k] - db[k]));
      peak = Math.max(peak, Math.abs(db[k]));
    }
    expect(diff).toBeLessThan(3e-3 * peak);
    await expect(forwardModelStep.run({ model, gathers }, forwardModelStep.params.parse({ waveletFrom: "wavelet-slot" }), ctx)).rejects.toThrow(/needs a wavelet/);
  });

  it("refuses a too coarse grid before any time step, saying what to change", async () => {
    const p = forwardModelStep.params.parse({ rickerPeakHz: 80 });
    await expect(forwardModelStep.run({ model, gathers: fieldGathers() }, p, makeStepContext({ pool }))).rejects.toThrow(
      /Grid too coarse.*Set spacingM to at most/,
    );
  });

  it("rejects mismatched modes and kinds in the settings", () => {
    const r = forwardModelStep.params.safeParse({ mode: "sh", sourceKind: "explosive" });
    expect(r.error!.issues[0].path).toEqual(["sourceKind"]);
    expect(forwardModelStep.params.safeParse({ mode: "psv", component: "y" }).error!.issues[0].path).toEqual(["component"]);
    expect(forwardModelStep.params.safeParse({ geometryFrom: "spread" }).error!.issues[0].path).toEqual(["spread"]);
  });

  it("stops when cancelled", async () => {
    const controller = new AbortController();
    const templates = fieldGathers().gathers;
    const run = modelShots(model, templates, { mode: "psv", sourceKind: "force-z", wavelet: { kind: "ricker", peakHz: 25 } }, {
      pool,
      signal: controller.signal,
      onShot: () => controller.abort(),
    });
    await expect(run).rejects.toThrow();
    controller.abort();
    await expect(modelShots(model, templates, { mode: "psv", sourceKind: "force-z", wavelet: { kind: "ricker", peakHz: 25 } }, { signal: controller.signal })).rejects.toMatchObject({ name: "AbortError" });
  });
});
