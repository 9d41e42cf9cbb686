/**
 * Size limits of model grids (our own rule, DEVELOPERS.md "Model size limits"): a grid beyond the
 * cell limit, or whose memory per worker exceeds what the limit allows, is refused before any
 * allocation with the setting, the limit and the memory named. The memory figures are the
 * arithmetic of typed arrays: 4 bytes per float32 value (ECMAScript, Float32Array.BYTES_PER_ELEMENT).
 */
import { afterEach, describe, expect, it } from "vitest";
import { DEFAULT_MAX_MODEL_CELLS, MAX_MODEL_CELLS_ENV, maxModelBytesPerWorker, maxModelCells, solverFootprint } from "../../pipeline/model-limits";
import { StepInputError } from "../../pipeline/step";
import { buildModelStep } from "../../pipeline/steps/build-model";
import { forwardModelStep } from "../../pipeline/steps/forward-model";
import { waveformInversionParams, waveformInversionStep } from "../../pipeline/steps/waveform-inversion";
import { buildModel } from "../../pipeline/kernels/fd/model-grid";
import type { Gather, GatherSet } from "../../pipeline/types";
import { makeStepContext } from "../helpers/step-context";

const saved = process.env[MAX_MODEL_CELLS_ENV];
afterEach(() => {
  if (saved === undefined) delete process.env[MAX_MODEL_CELLS_ENV];
  else process.env[MAX_MODEL_CELLS_ENV] = saved;
});

async function refusal(p: Promise<unknown>): Promise<StepInputError> {
  const err = await p.then(
    () => null,
    (e: unknown) => e,
  );
  expect(err).toBeInstanceOf(StepInputError);
  return err as StepInputError;
}

describe("the cell limit", () => {
  it("is 20 million cells by default, taken from TRACEWRIGHT_MAX_MODEL_CELLS when set, and refuses a malformed value", () => {
    expect(maxModelCells({})).toBe(DEFAULT_MAX_MODEL_CELLS);
    expect(DEFAULT_MAX_MODEL_CELLS).toBe(20_000_000);
    expect(maxModelCells({ [MAX_MODEL_CELLS_ENV]: "5000" })).toBe(5000);
    expect(() => maxModelCells({ [MAX_MODEL_CELLS_ENV]: "lots" })).toThrow(/TRACEWRIGHT_MAX_MODEL_CELLS must be a whole number/);
    // 10 float32 arrays per cell: 20 million cells → 800 MB per worker.
    expect(maxModelBytesPerWorker(20_000_000)).toBe(800_000_000);
  });

  it("counts the solver's padded grid: model plus absorbing cells on the sides and bottom", () => {
    const f = solverFootprint({ nx: 100, nz: 50 }, { mode: "psv", pmlCells: 20, freeSurface: true, workers: 2 })!;
    expect([f.nx, f.nz]).toEqual([140, 70]);
    // At least 5 wavefields and 5 material arrays of float32 on the padded grid.
    expect(f.bytesPerWorker).toBeGreaterThanOrEqual(10 * 140 * 70 * 4);
    expect(solverFootprint({ nx: 4, nz: 50 }, { mode: "psv", pmlCells: 20, freeSurface: true, workers: 1 })).toBeNull();
  });
});

describe("build-model", () => {
  it("refuses an oversized grid naming spacingM, the limit and the memory, instead of failing to allocate", async () => {
    // 100 m × 14 m at 10 µm: 1.4 × 10¹³ cells, beyond any typed array (it failed with
    // "Invalid typed array length" before the check).
    const p = buildModelStep.params.parse({ grid: { spacingM: 0.00001, widthM: 100, depthM: 14 }, layers: [{ topM: 0, vp: 400, vs: 160, rho: 1750 }] });
    const err = await refusal(buildModelStep.run({}, p, makeStepContext()));
    expect(err.field).toBe("grid.spacingM");
    expect(err.message).toMatch(/exceeds the limit of 20,000,000 cells \(TRACEWRIGHT_MAX_MODEL_CELLS; up to 800 MB per worker\)/);
    expect(err.message).toMatch(/Vp, Vs and density × cells × 4 bytes/);
  });

  it("applies the limit from the environment: a 41 × 21 grid passes at 1,000 cells and is refused at 800", async () => {
    const p = buildModelStep.params.parse({ grid: { spacingM: 0.5, widthM: 20, depthM: 10 }, layers: [{ topM: 0, vp: 400, vs: 160, rho: 1750 }] });
    process.env[MAX_MODEL_CELLS_ENV] = "1000";
    const m = (await buildModelStep.run({}, p, makeStepContext())).outputs.model!;
    expect(m.nx * m.nz).toBe(861);
    process.env[MAX_MODEL_CELLS_ENV] = "800";
    const err = await refusal(buildModelStep.run({}, p, makeStepContext()));
    expect(err.message).toMatch(/41 × 21 = 861 cells exceeds the limit of 800 cells/);
    // 861 cells × 3 arrays × 4 bytes = 10,332 bytes.
    expect(err.message).toMatch(/about 10 kB/);
  });
});

describe("forward-model", () => {
  it("refuses a model whose solver grid exceeds the limit, naming the model's grid settings", async () => {
    const model = buildModel({ originX: 0, originZ: 0, spacingM: 0.5, nx: 40, nz: 40 }, [{ topM: 0, vp: 400, vs: 200, rho: 1800 }]);
    process.env[MAX_MODEL_CELLS_ENV] = "2000"; // the 40 × 40 model fits, its 80 × 60 solver grid does not
    const p = forwardModelStep.params.parse({ mode: "psv", pmlCells: 20, spread: { sourceXM: [5], firstReceiverXM: 1, receiverSpacingM: 1, receiverCount: 10, sampleIntervalS: 0.0005, sampleCount: 100 } });
    const err = await refusal(forwardModelStep.run({ model }, p, makeStepContext()));
    expect(err.field).toBe("model");
    expect(err.message).toMatch(/80 × 60 = 4,800 cells exceeds the limit of 2,000 cells/);
    expect(err.message).toMatch(/build-model grid\.spacingM/);
  });
});

describe("waveform-inversion", () => {
  it("counts the stored forward wavefields: a grid within the cell limit is refused when they take more than the limit allows", async () => {
    const grid = { originX: 0, originZ: 0, spacingM: 0.25, nx: 97, nz: 33 };
    const model = buildModel(grid, [{ topM: 0, vp: 400, vs: 200, rho: 1800 }]);
    const receiverX = Array.from({ length: 24 }, (_, k) => 0.5 + k);
    const gathers: Gather[] = [2, 12].map((sx, s) => ({
      id: `shot-${s + 1}`,
      sampleIntervalS: 0.0005,
      sampleCount: 300,
      startTimeS: 0,
      traces: receiverX.map((rx, c) => ({
        sourceFile: "", channel: c + 1, sourcePoint: s + 1, blow: 0, sourceX: sx, sourceZ: 0,
        receiverX: rx, receiverZ: 0, offset: rx - sx, stackCount: 1, component: "y" as const, dead: false,
      })),
      data: new Float32Array(24 * 300),
    }));
    const set: GatherSet = { kind: "gathers", gathers };
    const p = waveformInversionParams.parse({ mode: "sh", pmlCells: 10, waveletFrom: "ricker", rickerPeakHz: 30, stages: [{ lowPassHz: 60, iterations: 1 }] });
    // Solver grid 117 × 43 = 5,031 cells, within 6,000; the kept wavefields (about 2 · 120 Hz ·
    // (0.15 s + the default 0.06 s wavelet lead) + 1 = 52 steps × 3 arrays × 3,201 cells × 4 bytes
    // = 2.0 MB) exceed the 240 kB that 6,000 cells allow per worker.
    process.env[MAX_MODEL_CELLS_ENV] = "6000";
    const err = await refusal(waveformInversionStep.run({ gathers: set, model }, p, makeStepContext()));
    expect(err.field).toBe("model");
    expect(err.message).toMatch(/stored forward wavefields \(52 steps\) 2 MB/);
    expect(err.message).toMatch(/more than the 240 kB per worker that the limit of 6,000 cells allows/);
  });
});
