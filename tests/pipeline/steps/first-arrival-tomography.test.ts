import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { describe, expect, it } from "vitest";
import { firstArrivalTomographyStep } from "../../../pipeline/steps/first-arrival-tomography";
import { describeParams, listSteps } from "../../../pipeline/registry";
import { StepInputError } from "../../../pipeline/step";
import { decodeArtifact, encodeArtifact } from "../../../pipeline/artifact-codec";
import type { ElasticModel, GatherSet, PickSet, Tomogram } from "../../../pipeline/types";
import { makeStepContext } from "../../helpers/step-context";
import { seededRandom } from "../../helpers/random";
import { makeGather } from "./make-gather";
import { closeDb, getDb } from "../../../db/client";
import { getRun } from "../../../db/queries/runs";
import { readArtifactSync } from "../../../pipeline/artifact-store";
import { executeRun } from "../../../pipeline/runner";
import { createRun } from "../../../pipeline/run-create";
import { writeQuillmoorSurvey } from "../../../examples/quillmoor/make-field-data";

const V0 = 450;
const G = 25; // (m/s)/m

/**
 * First-arrival time between surface points x apart in v(z) = V0 + G·z: (2/G)·asinh(G·x / (2·V0))
 * (circular rays in a linear gradient, Slotnick 1959; the formula of FIELD.md "Travel times").
 */
const gradientTime = (x: number) => (2 / G) * Math.asinh((G * Math.abs(x)) / (2 * V0));

/**
 * Nine shots every 6 m into 49 receivers 0 … 48 m (headers only: the step reads positions), and
 * picks of the closed-form times plus 0.3 ms of seeded noise with quality 1. `extraFlagged` adds
 * that many flagged picks 15 ms late (the picker's off-trend marks).
 */
function survey(extraFlagged = 0): { gathers: GatherSet; picks: PickSet } {
  const rnd = seededRandom(77);
  const gathers: GatherSet = { kind: "gathers", gathers: [] };
  const picks: PickSet = { kind: "picks", method: "closed-form", picks: [] };
  let flaggedLeft = extraFlagged;
  for (let sp = 0; sp < 9; sp++) {
    const sourceX = 6 * sp;
    const id = `sp${sp + 1}`;
    const g = makeGather({ id, traceCount: 49, sampleCount: 4, sampleIntervalS: 0.001, sourcePoint: sp + 1, sourceX, firstReceiverX: 0, receiverSpacingM: 1 });
    gathers.gathers.push(g);
    g.traces.forEach((h, t) => {
      if (h.offset === 0) return;
      let timeS = gradientTime(h.offset) + 0.0003 * rnd.gaussian();
      let flagged = false;
      if (flaggedLeft > 0 && sp === 4 && t % 7 === 3) {
        timeS += 0.015;
        flagged = true;
        flaggedLeft--;
      }
      picks.picks.push({ gatherId: id, traceIndex: t, timeS, quality: 1, flagged });
    });
  }
  return { gathers, picks };
}

/** Mean |v − v_true| / v_true over the cells with coverage at or above the tomogram's threshold. */
function coveredError(t: Tomogram, field: Float32Array): { mean: number; cells: number } {
  let sum = 0;
  let cells = 0;
  for (let iz = 0; iz < t.nz; iz++) {
    const truth = V0 + G * (t.originZ + iz * t.spacingM);
    for (let ix = 0; ix < t.nx; ix++) {
      const k = iz * t.nx + ix;
      if (t.coverageM[k] < t.coverageThresholdM) continue;
      sum += Math.abs(field[k] - truth) / truth;
      cells++;
    }
  }
  return { mean: sum / cells, cells };
}

describe("first-arrival-tomography step", () => {
  it("fits closed-form gradient times from the default gradient start and moves Vp towards the truth", async () => {
    const { gathers, picks } = survey();
    const res = await firstArrivalTomographyStep.run({ picks, gathers }, firstArrivalTomographyStep.params.parse({ pickUncertaintyMs: 0.3, iterations: 5 }), makeStepContext());
    const t = res.outputs.tomogram!;
    expect(t.kind).toBe("tomogram");
    expect(t.wave).toBe("p");
    // Grid from the spread: −2 … 50 m at 0.5 m, 15 m deep.
    expect([t.originX, t.nx, t.nz, t.spacingM, t.originZ]).toEqual([-2, 105, 31, 0.5, 0]);
    for (const arr of [t.velocity, t.startingVelocity, t.coverageM, t.rayCount]) expect(arr.length).toBe(t.nx * t.nz);
    expect(t.reachDepthM.length).toBe(t.nx);
    expect(t.picks).toHaveLength(9 * 48);
    expect(t.rayStart).toHaveLength(9 * 48 + 1);
    expect(t.rayPoints.length).toBe(2 * t.rayStart[t.rayStart.length - 1]);
    // Rays run from the receiver to the source, in profile coordinates.
    const p0 = t.picks[0];
    expect(t.rayPoints[0]).toBeCloseTo(p0.receiverX, 6);
    expect(t.rayPoints[2 * (t.rayStart[1] - 1)]).toBeCloseTo(p0.sourceX, 6);

    const rms = t.iterations.map((r) => r.rmsS);
    expect(t.iterations).toHaveLength(6); // start + 5 updates
    // The residual falls by more than 80 % and ends near the 0.3 ms noise (below 0.45 ms: the
    // noise plus the solver's own error, about 0.1–0.2 % of 60 ms at 0.5 m cells; see the eikonal test).
    expect(rms[rms.length - 1]).toBeLessThan(0.2 * rms[0]);
    expect(rms[rms.length - 1]).toBeLessThan(0.00045);
    expect(t.picks.every((p) => Math.abs(p.modelledS - p.observedS) < 0.002)).toBe(true);
    // Velocity: where the rays are, the error against the true gradient falls to under half of
    // the start's (start 400 + 20z against 450 + 25z: 11 % at the surface).
    const before = coveredError(t, t.startingVelocity);
    const after = coveredError(t, t.velocity);
    expect(after.cells).toBeGreaterThan(500);
    expect(after.mean).toBeLessThan(0.5 * before.mean);
    expect(after.mean).toBeLessThan(0.04);
    // The 48 m offsets turn at √(24² + 18²) − 18 = 12 m (circular rays, Slotnick 1959): the
    // deepest any ray of this survey goes. Mid-spread the covered cells reach most of the way.
    const mid = t.reachDepthM[Math.round((24 - t.originX) / t.spacingM)];
    expect(mid).toBeGreaterThan(6);
    expect(mid).toBeLessThanOrEqual(12.5);
    expect(res.summary).toMatchObject({ picks: 432, leftOut: 0, sources: 9, startingModel: "gradient" });
    expect(res.series!.map((s) => s.name)).toEqual(["travel-time-rms", "travel-times", "ray-reach-depth"]);
    // Plain data: the slot survives the artifact codec unchanged (NaN reach depths included).
    const back = decodeArtifact(encodeArtifact(t)) as Tomogram;
    expect(back).toEqual(t);
    expect(back.velocity).toBeInstanceOf(Float32Array);
    expect(back.rayCount).toBeInstanceOf(Int32Array);
  });

  it("leaves flagged picks out unless told to keep them", async () => {
    const { gathers, picks } = survey(3);
    const params = { spacingM: 1, iterations: 2, pickUncertaintyMs: 0.3 };
    const without = await firstArrivalTomographyStep.run({ picks, gathers }, firstArrivalTomographyStep.params.parse(params), makeStepContext());
    expect(without.summary).toMatchObject({ picks: 429, leftOut: 3 });
    expect(without.outputs.tomogram!.picks.some((p) => p.flagged)).toBe(false);
    const kept = await firstArrivalTomographyStep.run({ picks, gathers }, firstArrivalTomographyStep.params.parse({ ...params, keepFlaggedPicks: true }), makeStepContext());
    expect(kept.summary).toMatchObject({ picks: 432, leftOut: 0 });
    const flagged = kept.outputs.tomogram!.picks.filter((p) => p.flagged);
    expect(flagged).toHaveLength(3);
    // Three 15 ms outliers in 432 picks raise the final rms above the clean run's.
    const last = (r: typeof kept) => r.outputs.tomogram!.iterations.at(-1)!.rmsS;
    expect(last(kept)).toBeGreaterThan(last(without) * 1.5);
  });

  it("starts from the input model on its grid, taking Vs for SH picks", async () => {
    const { gathers, picks } = survey();
    const nx = 105;
    const nz = 31;
    const vs = new Float32Array(nx * nz);
    for (let iz = 0; iz < nz; iz++) vs.fill(V0 + G * iz * 0.5, iz * nx, (iz + 1) * nx);
    const model: ElasticModel = { kind: "model", nx, nz, spacingM: 0.5, originX: -2, originZ: 0, vp: vs.map((v) => 2 * v), vs, rho: new Float32Array(nx * nz).fill(1800) };
    const params = { iterations: 1, pickUncertaintyMs: 0.3 };
    const sh = await firstArrivalTomographyStep.run({ picks, gathers, model }, firstArrivalTomographyStep.params.parse({ ...params, wave: "s" }), makeStepContext());
    const t = sh.outputs.tomogram!;
    expect(t.wave).toBe("s");
    expect([t.nx, t.nz, t.originX]).toEqual([nx, nz, -2]);
    expect(Array.from(t.startingVelocity)).toEqual(Array.from(vs));
    // The times were made in this very Vs: the start already fits to the noise.
    expect(t.iterations[0].rmsS).toBeLessThan(0.00045);
    expect(sh.summary).toMatchObject({ startingModel: "input model" });
    // The same picks read as P against Vp = 2·Vs: every time is about twice too short.
    const p = await firstArrivalTomographyStep.run({ picks, gathers, model }, firstArrivalTomographyStep.params.parse(params), makeStepContext());
    expect(p.outputs.tomogram!.iterations[0].rmsS).toBeGreaterThan(0.01);
  });

  it("says what is wrong with the picks or settings", async () => {
    const { gathers, picks } = survey();
    const stray: PickSet = { ...picks, picks: [...picks.picks, { gatherId: "sp99", traceIndex: 0, timeS: 0.01, quality: 1, flagged: false }] };
    const params = firstArrivalTomographyStep.params.parse({ spacingM: 1, iterations: 1 });
    await expect(firstArrivalTomographyStep.run({ picks: stray, gathers }, params, makeStepContext())).rejects.toThrow(StepInputError);
    await expect(firstArrivalTomographyStep.run({ picks: stray, gathers }, params, makeStepContext())).rejects.toThrow(/sp99/);
    const few: PickSet = { ...picks, picks: picks.picks.slice(0, 2) };
    await expect(firstArrivalTomographyStep.run({ picks: few, gathers }, params, makeStepContext())).rejects.toThrow(/only 2 usable picks/);
    const small: ElasticModel = { kind: "model", nx: 21, nz: 11, spacingM: 1, originX: 0, originZ: 0, vp: new Float32Array(231).fill(500), vs: new Float32Array(231).fill(250), rho: new Float32Array(231).fill(1800) };
    await expect(firstArrivalTomographyStep.run({ picks, gathers, model: small }, params, makeStepContext())).rejects.toThrow(/outside the model's grid/);
    const bounds = firstArrivalTomographyStep.params.safeParse({ minVelocityMps: 900, maxVelocityMps: 800 });
    expect(bounds.success).toBe(false);
    expect(bounds.error?.issues.map((i) => i.path[0])).toContain("maxVelocityMps");
    expect(firstArrivalTomographyStep.params.safeParse({ wave: "love" }).success).toBe(false);
  });

  it("weights picks by their quality and stops when the run is cancelled", async () => {
    const { gathers, picks } = survey();
    const graded: PickSet = { ...picks, picks: picks.picks.map((p, i) => ({ ...p, quality: i % 2 === 0 ? 1 : 0.5 })) };
    const params = firstArrivalTomographyStep.params.parse({ spacingM: 1, iterations: 1, pickUncertaintyMs: 2 });
    const res = await firstArrivalTomographyStep.run({ picks: graded, gathers }, params, makeStepContext());
    // σ = pickUncertaintyMs · (2 − quality): 2 ms at quality 1, 3 ms at quality 0.5.
    expect(res.outputs.tomogram!.picks[0].uncertaintyS).toBeCloseTo(0.002, 12);
    expect(res.outputs.tomogram!.picks[1].uncertaintyS).toBeCloseTo(0.003, 12);
    const ctx = makeStepContext();
    ctx.abort();
    await expect(firstArrivalTomographyStep.run({ picks, gathers }, params, ctx)).rejects.toMatchObject({ name: "AbortError" });
  });

  it("is registered right after first-arrivals with every setting defaulted and described", () => {
    const ids = listSteps().map((s) => s.id);
    expect(ids.indexOf("first-arrival-tomography")).toBe(ids.indexOf("first-arrivals") + 1);
    expect(ids.indexOf("first-arrival-tomography")).toBeLessThan(ids.indexOf("build-model"));
    for (const d of describeParams(firstArrivalTomographyStep)) {
      expect(d.optional, d.name).toBe(true);
      expect("default" in d, d.name).toBe(true);
      const unit = /Ms$/.test(d.name) ? "ms" : /Mps$/.test(d.name) ? "m/s" : /M$/.test(d.name) ? "m" : null;
      if (unit) expect(d.description, d.name).toContain(unit);
    }
  });
});

describe("first-arrival-tomography in a pipeline", () => {
  it("runs after first-arrivals from a pipeline file and writes a tomogram artifact", async () => {
    const tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-tomography-"));
    const previous = process.env.TRACEWRIGHT_DATA_DIR;
    process.env.TRACEWRIGHT_DATA_DIR = path.join(tmp, "data");
    try {
      const db = getDb();
      writeQuillmoorSurvey(path.join(tmp, "field"), { sourcePoints: 4, blows: 1, channels: 24, recordLengthS: 0.15 });
      const file = path.join(tmp, "tomography.yaml");
      fs.writeFileSync(
        file,
        [
          "name: tomography",
          "survey: tomography-site",
          "fieldData: ./field",
          "geometryTable: ./field/qm1-geometry.csv",
          "steps:",
          "  - step: import-records",
          "  - step: geometry",
          "  - step: first-arrivals",
          "    settings: { searchFastestMps: 2500, searchSlowestMps: 300 }",
          "  - step: first-arrival-tomography",
          "    settings: { iterations: 2, spacingM: 1, depthM: 10 }",
          "",
        ].join("\n"),
      );
      const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor: { userId: null, label: "tester", door: "cli" } });
      const run = await executeRun(db, runId);
      expect(run.status, run.error).toBe("succeeded");
      const steps = Object.fromEntries(getRun(db, runId)!.steps.map((st) => [st.label, st]));
      const picked = (steps["first-arrivals"].summary as { picked: number }).picked;
      const summary = steps["first-arrival-tomography"].summary as { picks: number; leftOut: number; startRmsMs: number; finalRmsMs: number };
      expect(summary.picks + summary.leftOut).toBe(picked);
      const t = readArtifactSync(steps["first-arrival-tomography"].outputs.tomogram) as Tomogram;
      expect(t.kind).toBe("tomogram");
      expect(t.picks).toHaveLength(summary.picks);
      expect(t.iterations).toHaveLength(3);
      expect(summary.finalRmsMs).toBeLessThan(summary.startRmsMs);
    } finally {
      closeDb();
      if (previous === undefined) delete process.env.TRACEWRIGHT_DATA_DIR;
      else process.env.TRACEWRIGHT_DATA_DIR = previous;
      fs.rmSync(tmp, { recursive: true, force: true });
    }
  });
});
