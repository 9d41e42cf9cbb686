/**
 * Steps dispersion-image, surface-wave-profile and build-model from the profiles, on analytic
 * gathers whose surface wave has the dispersion of a known layered model.
 */
import { describe, expect, it } from "vitest";
import { dispersionImageStep, receiverWindows } from "../../../pipeline/steps/dispersion-image";
import { surfaceWaveProfileStep, growingThicknesses } from "../../../pipeline/steps/surface-wave-profile";
import { buildModelStep } from "../../../pipeline/steps/build-model";
import { StepInputError } from "../../../pipeline/step";
import { canonicalJson, decodeArtifact, encodeArtifact } from "../../../pipeline/artifact-codec";
import { describeParams, getStep, listSteps } from "../../../pipeline/registry";
import { layeredFromVs } from "../../../pipeline/kernels/dispersion/inversion";
import { rayleighDispersion } from "../../../pipeline/kernels/dispersion/rayleigh";
import type { DispersionSet, Gather, GatherSet, VelocityProfileSet } from "../../../pipeline/types";
import { makeStepContext } from "../../helpers/step-context";
import { seededRandom } from "../../helpers/random";
import { makeGather } from "./make-gather";
import { createWorkerPool } from "../../../pipeline/workers/pool";

const DT = 0.001;
const NS = 1000; // 1 s records: whole-hertz components are orthogonal over the record
const density = { rule: "constant" as const, kgPerM3: 1800 };
const TRUTH = layeredFromVs([150, 240, 380], [2.5, 5], 0.3, density);
const COMPONENTS = Array.from({ length: 45 }, (_, i) => 6 + i); // 6 … 50 Hz
const C_OF_F = rayleighDispersion(TRUTH, COMPONENTS);

/**
 * A shot whose traces are the fundamental Rayleigh mode of TRUTH made by summing whole-hertz
 * components, each travelling away from the source at its phase velocity c(f); receivers every
 * metre from 0 to 47 m.
 */
function shot(id: string, sourceX: number, seed: number): Gather {
  const rnd = seededRandom(seed);
  const phases = COMPONENTS.map(() => 2 * Math.PI * rnd.uniform());
  return makeGather({ id, sourceX, traceCount: 48, sampleCount: NS, sampleIntervalS: DT, firstReceiverX: 0, receiverSpacingM: 1 }, (_t, time, h) => {
    const x = Math.abs(h.offset);
    let v = 0;
    COMPONENTS.forEach((f, k) => {
      v += Math.cos(2 * Math.PI * f * (time - x / C_OF_F[k]) + phases[k]);
    });
    return v / Math.sqrt(x);
  });
}

const gathers = (): GatherSet => ({ kind: "gathers", gathers: [shot("sp01", -4, 1), shot("sp02", 51, 2)] });

const imageSettings = { minFrequencyHz: 6, maxFrequencyHz: 50, frequencyStepHz: 1, minVelocityMps: 80, maxVelocityMps: 450, velocityStepMps: 1, minOffsetM: 3 };

describe("dispersion-image step", () => {
  it("images each window, stacks shots from both ends by |offset|, and picks the prescribed curve within the velocity step", async () => {
    const res = await dispersionImageStep.run({ gathers: gathers() }, dispersionImageStep.params.parse({ ...imageSettings, windowReceivers: 24, windowStepReceivers: 12 }), makeStepContext());
    const d = res.outputs.dispersion as DispersionSet;
    expect(d.kind).toBe("dispersion");
    expect(d.windows.map((w) => w.id)).toEqual(["W01", "W02", "W03"]);
    expect(d.windows.map((w) => [w.receiverX0, w.receiverX1])).toEqual([[0, 23], [12, 35], [24, 47]]);
    const nf = d.frequenciesHz.length;
    const nc = d.velocitiesMps.length;
    expect(nf).toBe(45);
    for (const w of d.windows) {
      expect(w.gatherIds).toEqual(["sp01", "sp02"]);
      expect(w.image.length).toBe(nf * nc);
      const auto = w.picks.find((c) => c.origin === "automatic")!;
      expect(auto.frequenciesHz.length).toBe(nf);
      // Each component arrives with phase exactly e^{−iωx/c(f)} on both sides (closed form), so
      // the image peaks at c(f); the refined pick lies within one velocity step (1 m/s).
      auto.frequenciesHz.forEach((f, i) => expect(Math.abs(auto.velocitiesMps[i] - C_OF_F[COMPONENTS.indexOf(f)]), `${w.id} ${f} Hz`).toBeLessThanOrEqual(1));
    }
    // The artifact survives the codec (typed arrays and all).
    const back = decodeArtifact(encodeArtifact(d)) as DispersionSet;
    expect(back.windows[1].image).toEqual(d.windows[1].image);
    expect(res.summary).toMatchObject({ windows: 3, frequencies: 45 });
  });

  it("keeps hand picks per window and refuses a window that does not exist", async () => {
    const params = dispersionImageStep.params.parse({ ...imageSettings, handPicks: [{ window: "W01", points: [[20, 160], [10, 250]] }] });
    const res = await dispersionImageStep.run({ gathers: gathers() }, params, makeStepContext());
    const hand = (res.outputs.dispersion as DispersionSet).windows[0].picks.find((c) => c.origin === "hand")!;
    expect(Array.from(hand.frequenciesHz)).toEqual([10, 20]);
    expect(Array.from(hand.velocitiesMps)).toEqual([250, 160]);
    const bad = dispersionImageStep.params.parse({ ...imageSettings, handPicks: [{ window: "W07", points: [[20, 160]] }] });
    await expect(dispersionImageStep.run({ gathers: gathers() }, bad, makeStepContext())).rejects.toThrow(/W07/);
    // A hand pick off the image (above its highest velocity) is refused, naming the point.
    const off = dispersionImageStep.params.parse({ ...imageSettings, handPicks: [{ window: "W01", points: [[20, 160], [12, imageSettings.maxVelocityMps + 50]] }] });
    const err = await dispersionImageStep.run({ gathers: gathers() }, off, makeStepContext()).catch((e) => e);
    expect(err).toBeInstanceOf(StepInputError);
    expect(err.field).toBe("handPicks.0.points.1");
  });

  it("refuses settings and data it cannot image", async () => {
    expect(dispersionImageStep.params.safeParse({ minFrequencyHz: 50, maxFrequencyHz: 10 }).success).toBe(false);
    await expect(dispersionImageStep.run({ gathers: gathers() }, dispersionImageStep.params.parse({ maxFrequencyHz: 600 }), makeStepContext())).rejects.toThrow(/Nyquist/);
    await expect(dispersionImageStep.run({ gathers: gathers() }, dispersionImageStep.params.parse({ shots: ["sp09"] }), makeStepContext())).rejects.toBeInstanceOf(StepInputError);
    await expect(dispersionImageStep.run({ gathers: gathers() }, dispersionImageStep.params.parse({ minOffsetM: 200, maxOffsetM: 300 }), makeStepContext())).rejects.toThrow(/offset/);
  });

  it("splits receivers into moving windows, the last one flush with the end", () => {
    const xs = Array.from({ length: 10 }, (_, i) => i);
    expect(receiverWindows(xs, 0, 0)).toEqual([[0, 9]]);
    expect(receiverWindows(xs, 4, 3)).toEqual([[0, 3], [3, 6], [6, 9]]);
    expect(receiverWindows(xs, 4, 4)).toEqual([[0, 3], [4, 7], [6, 9]]);
  });
});

describe("surface-wave-profile step and build-model from the profiles", () => {
  it("recovers the layered model from each window, reports fit and depth of investigation, and build-model grids it", async () => {
    const image = await dispersionImageStep.run({ gathers: gathers() }, dispersionImageStep.params.parse({ ...imageSettings, windowReceivers: 24, windowStepReceivers: 24 }), makeStepContext());
    const res = await surfaceWaveProfileStep.run(
      { dispersion: image.outputs.dispersion },
      surfaceWaveProfileStep.params.parse({ layerThicknessesM: [2.5, 5], poissonRatio: 0.3, densityKgPerM3: 1800 }),
      makeStepContext(),
    );
    const set = res.outputs.velocityProfiles as VelocityProfileSet;
    expect(set.profiles.map((p) => p.windowId)).toEqual(["W01", "W02"]);
    for (const p of set.profiles) {
      // Picks within 1 m/s of the true curve: Vs within 2 % of the truth in every layer.
      Array.from(TRUTH.vs).forEach((v, i) => expect(Math.abs(p.vs[i] / v - 1), `${p.windowId} layer ${i}`).toBeLessThan(0.02));
      expect(p.rmsMisfitMps).toBeLessThan(1);
      const longest = Math.max(...Array.from(p.observed.frequenciesHz, (f, i) => p.observed.velocitiesMps[i] / f));
      expect(p.depthOfInvestigationM).toBeCloseTo(0.5 * longest, 9);
      expect(p.modelled.velocitiesMps.length).toBe(p.observed.velocitiesMps.length);
      expect(p.vp[0] / p.vs[0]).toBeCloseTo(Math.sqrt(1.4 / 0.4), 9); // ν = 0.3
    }
    // The dispersion slot comes back with the modelled curve of each window for drawing.
    const withModel = res.outputs.dispersion as DispersionSet;
    expect(withModel.windows.every((w) => w.modelled?.origin === "modelled")).toBe(true);
    expect(withModel.windows[0].image).toBe((image.outputs.dispersion as DispersionSet).windows[0].image);
    expect(decodeArtifact(encodeArtifact(set))).toMatchObject({ kind: "velocity-profiles" });

    const grid = { spacingM: 0.5, originXM: 0, widthM: 47, depthM: 40 };
    const built = await buildModelStep.run({ velocityProfiles: set }, buildModelStep.params.parse({ grid, from: "velocity-profiles" }), makeStepContext());
    const m = built.outputs.model!;
    const cell = (x: number, z: number) => Math.round(z / 0.5) * m.nx + Math.round(x / 0.5);
    // Left of the first profile's centre: that profile; in the first layer, Vs of layer 0.
    expect(m.vs[cell(2, 1)]).toBeCloseTo(set.profiles[0].vs[0], 3);
    expect(m.vs[cell(40, 4)]).toBeCloseTo(set.profiles[1].vs[1], 3);
    // Far below the depth of investigation: continued from the value there (the half-space).
    expect(m.vs[cell(2, 39)]).toBeCloseTo(set.profiles[0].vs[2], 3);
    // Over typed layers: below the depth of investigation the layers take over.
    const over = await buildModelStep.run(
      { velocityProfiles: set },
      buildModelStep.params.parse({ grid, from: "velocity-profiles-over-layers", layers: [{ topM: 0, vp: 2000, vs: 800, rho: 2100 }] }),
      makeStepContext(),
    );
    expect(over.outputs.model!.vs[cell(2, 39)]).toBe(800);
    expect(over.outputs.model!.vs[cell(2, 1)]).toBeCloseTo(set.profiles[0].vs[0], 3);
  }, 30000);

  it("gives the same profiles through the worker pool (one window per task) as in-process", async () => {
    const image = await dispersionImageStep.run({ gathers: gathers() }, dispersionImageStep.params.parse({ ...imageSettings, windowReceivers: 24, windowStepReceivers: 24 }), makeStepContext());
    const params = surfaceWaveProfileStep.params.parse({ layerCount: 3 });
    const local = await surfaceWaveProfileStep.run({ dispersion: image.outputs.dispersion }, params, makeStepContext());
    const pool = createWorkerPool(2);
    try {
      const remote = await surfaceWaveProfileStep.run({ dispersion: image.outputs.dispersion }, params, makeStepContext({ pool }));
      // Same kernel, same inputs, same order of operations: identical artifacts.
      expect(encodeArtifact(remote.outputs.velocityProfiles)).toEqual(encodeArtifact(local.outputs.velocityProfiles));
    } finally {
      await pool.close();
    }
  }, 60000);

  it("build-model keeps today's parameters and cache keys, and asks for profiles when told to use them", async () => {
    const today = buildModelStep.params.parse({ grid: { widthM: 40, depthM: 15 } });
    expect("from" in today).toBe(false);
    expect(canonicalJson(today)).not.toContain('"from"');
    // The cache key hashes id, version, parsed parameters and inputs: version and parameters as before.
    expect(buildModelStep.version).toBe(1);
    await expect(
      buildModelStep.run({}, buildModelStep.params.parse({ grid: { widthM: 40, depthM: 15 }, from: "velocity-profiles" }), makeStepContext()),
    ).rejects.toThrow(/surface-wave-profile/);
    expect(buildModelStep.params.safeParse({ csvGrid: "x,z,vp,vs,rho\n0,0,400,200,1800", from: "velocity-profiles" }).success).toBe(false);
  });

  it("leaves out windows with too few picks and says why", async () => {
    const image = await dispersionImageStep.run({ gathers: gathers() }, dispersionImageStep.params.parse(imageSettings), makeStepContext());
    const d = image.outputs.dispersion as DispersionSet;
    const few: DispersionSet = { ...d, windows: d.windows.map((w) => ({ ...w, picks: [{ ...w.picks[0], frequenciesHz: w.picks[0].frequenciesHz.slice(0, 3), velocitiesMps: w.picks[0].velocitiesMps.slice(0, 3) }] })) };
    await expect(surfaceWaveProfileStep.run({ dispersion: few }, surfaceWaveProfileStep.params.parse({}), makeStepContext())).rejects.toThrow(/5 or more picks/);
    expect(growingThicknesses(3, 19).reduce((a, b) => a + b, 0)).toBeCloseTo(19, 12);
  });

  it("leaves out a window whose curve no layered ground fits (misfit above maxMisfitPercent) and says why", async () => {
    const image = await dispersionImageStep.run({ gathers: gathers() }, dispersionImageStep.params.parse({ ...imageSettings, windowReceivers: 24, windowStepReceivers: 24 }), makeStepContext());
    const d = image.outputs.dispersion as DispersionSet;
    // W02's picks replaced by a zigzag between 60 and 300 m/s: a fundamental-mode Rayleigh curve of
    // layers over a half-space varies smoothly with frequency (common practice), so no model fits it.
    const zigzag: DispersionSet = {
      ...d,
      windows: d.windows.map((w, i) =>
        i === 1 ? { ...w, picks: [{ ...w.picks[0], velocitiesMps: Float64Array.from(w.picks[0].velocitiesMps, (_, k) => (k % 2 === 0 ? 60 : 300)) }] } : w,
      ),
    };
    const ctx = makeStepContext();
    const res = await surfaceWaveProfileStep.run({ dispersion: zigzag }, surfaceWaveProfileStep.params.parse({ layerThicknessesM: [2.5, 5] }), ctx);
    expect((res.outputs.velocityProfiles as VelocityProfileSet).profiles.map((p) => p.windowId)).toEqual(["W01"]);
    const skipped = res.summary!.skipped as Array<{ window: string; reason: string }>;
    expect(skipped.map((k) => k.window)).toEqual(["W02"]);
    expect(skipped[0].reason).toMatch(/maxMisfitPercent 10 %/);
    // With every window unfit, the step refuses and names the setting.
    const allBad: DispersionSet = { ...zigzag, windows: zigzag.windows.map((w) => ({ ...w, picks: zigzag.windows[1].picks })) };
    await expect(surfaceWaveProfileStep.run({ dispersion: allBad }, surfaceWaveProfileStep.params.parse({ layerThicknessesM: [2.5, 5] }), makeStepContext())).rejects.toMatchObject({
      field: "maxMisfitPercent",
    });
  }, 30000);

  it("are registered before build-model with documented parameters", () => {
    const ids = listSteps().map((s) => s.id);
    expect(ids.indexOf("dispersion-image")).toBeLessThan(ids.indexOf("surface-wave-profile"));
    expect(ids.indexOf("surface-wave-profile")).toBe(ids.indexOf("build-model") - 1);
    for (const id of ["dispersion-image", "surface-wave-profile"]) {
      for (const d of describeParams(getStep(id))) {
        expect(d.optional, `${id}.${d.name}`).toBe(true);
        expect(d.description.length, `${id}.${d.name}`).toBeGreaterThan(15);
        if (/Hz$/.test(d.name)) expect(d.description, d.name).toContain("Hz");
        if (/Mps$/.test(d.name)) expect(d.description, d.name).toContain("m/s");
        if (/M$/.test(d.name)) expect(d.description, d.name).toContain("m");
      }
    }
  });
});
