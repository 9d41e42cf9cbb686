/**
 * Pure helpers of the inversion view (app/ui/inversion/inversion-data.ts) and of the rerun
 * form's list editor (app/ui/rerun/object-list.ts), checked against closed forms:
 * - unit-norm traces have L2 norm 1 (definition of the normalisation), and for unit-norm ŝ, d̂
 *   ½‖ŝ − d̂‖² = 1 − ŝ·d̂ (Choi & Alkhalifah 2012, Geophys. Prosp. 60, the normalised correlation
 *   objective): a scaled copy gives 0, a sign-flipped copy 2, sin against cos over whole periods 1
 *   (orthogonality of sine and cosine over a full period, any calculus text);
 * - the envelope of cos(2πft) is 1 (|analytic signal of cos| = |e^{iωt}| = 1, Bracewell 2000,
 *   The Fourier Transform and its Applications, ch. 12), away from the trace ends;
 * - the misfit the engine computes for "trace-normalised-least-squares"
 *   (pipeline/kernels/misfit-adjoint.ts) equals ½ Σ residual² of the residual drawn here.
 */
import { describe, expect, it } from "vitest";
import {
  depthProfile,
  iterationFrames,
  measuredTraces,
  modelDifference,
  stageSegments,
  symmetricLimit,
  unitNormTraces,
  valueRange,
  windowSamples,
} from "@/app/ui/inversion/inversion-data";
import { fieldProblem, fieldValue, labelOfName, moveItem, newItem, removeItem, unitOfName } from "@/app/ui/rerun/object-list";
import { misfitAndAdjoint } from "@/pipeline/kernels/misfit-adjoint";
import { describeParams, getStep } from "@/pipeline/registry";
import { seededRandom } from "../helpers/random";

describe("stageSegments", () => {
  // As the waveform-inversion step writes its "misfit" series: the first point of a stage is
  // the accepted model measured in the new band, at the same x as the previous stage's last.
  const points = [
    { x: 0, y: 311, group: "stage 1 (15 Hz)" },
    { x: 1, y: 300, group: "stage 1 (15 Hz)" },
    { x: 2, y: 280, group: "stage 1 (15 Hz)" },
    { x: 2, y: 420, group: "stage 2 (25 Hz)" },
    { x: 3, y: 390, group: "stage 2 (25 Hz)" },
    { x: 3, y: 510, group: "stage 3 (40.5 Hz)" },
  ];

  it("splits the points by stage in order, with number and corner from the group name", () => {
    const s = stageSegments(points);
    expect(s.map((x) => [x.stage, x.lowPassHz, x.startX, x.endX, x.points.length])).toEqual([
      [1, 15, 0, 2, 3],
      [2, 25, 2, 3, 2],
      [3, 40.5, 3, 3, 1],
    ]);
  });

  it("records the jump at each stage start (not hidden): previous stage's last value to this stage's first", () => {
    const s = stageSegments(points);
    expect(s[0].jump).toBeNull();
    expect(s[1].jump).toEqual({ x: 2, from: 280, to: 420 });
    expect(s[2].jump).toEqual({ x: 3, from: 390, to: 510 });
  });

  it("adds the start measured with the last stage's wavelet where the step recorded one (series misfit-with-last-wavelet)", () => {
    const s = stageSegments(points, [{ x: 3, y: 540, group: "stage 3 (40.5 Hz)" }]);
    expect(s[1].jump).toEqual({ x: 2, from: 280, to: 420 });
    expect(s[2].jump).toEqual({ x: 3, from: 390, to: 510, withLastWavelet: 540 });
  });

  it("sorts each stage by iteration and skips non-finite values", () => {
    const s = stageSegments([
      { x: 2, y: 5, group: "stage 1 (10 Hz)" },
      { x: 0, y: 7, group: "stage 1 (10 Hz)" },
      { x: 1, y: Number.NaN, group: "stage 1 (10 Hz)" },
    ]);
    expect(s[0].points).toEqual([{ x: 0, y: 7 }, { x: 2, y: 5 }]);
  });

  it("has no stage for no points", () => {
    expect(stageSegments([])).toEqual([]);
  });
});

describe("iterationFrames", () => {
  const meta = (i: number, stage: number) => ({ stage, stageIteration: i, iteration: i, misfit: 10 - i, stepLength: 1, lowPassHz: 15, measure: "normalised-correlation" });
  const items = [
    { kind: "gradient", index: 2, label: null, hash: "g2", meta: meta(2, 1) },
    { kind: "model", index: 2, label: null, hash: "m2", meta: meta(2, 1) },
    { kind: "model", index: 1, label: null, hash: "m1", meta: meta(1, 1) },
    { kind: "observed", index: 1, label: null, hash: "o1", meta: null },
  ];

  it("starts at iteration 0 with the starting model, then the recorded models by index with their gradients", () => {
    const f = iterationFrames("start", items);
    expect(f.map((x) => [x.iteration, x.modelHash, x.gradientHash])).toEqual([
      [0, "start", null],
      [1, "m1", null],
      [2, "m2", "g2"],
    ]);
    expect(f[2].meta?.stage).toBe(1);
    expect(f[0].meta).toBeNull();
  });

  it("without a starting model lists only the recorded iterations", () => {
    expect(iterationFrames(null, items).map((x) => x.iteration)).toEqual([1, 2]);
  });
});

describe("model difference, limits and depth profile", () => {
  it("gives the change in the unit and in per cent of the starting value", () => {
    const d = modelDifference(Float32Array.of(110, 90, 200), Float32Array.of(100, 100, 0));
    expect(Array.from(d.absolute)).toEqual([10, -10, 200]);
    expect(d.percent[0]).toBeCloseTo(10, 5);
    expect(d.percent[1]).toBeCloseTo(-10, 5);
    expect(Number.isNaN(d.percent[2])).toBe(true);
    expect(() => modelDifference(Float32Array.of(1), Float32Array.of(1, 2))).toThrow(RangeError);
  });

  it("finds ranges and the symmetric limit, ignoring non-finite values", () => {
    expect(valueRange(Float32Array.of(3, Number.NaN, -2, 7))).toEqual({ lo: -2, hi: 7 });
    expect(symmetricLimit(Float32Array.of(3, -9, Number.NaN, 4))).toBe(9);
  });

  it("reads a column of a flat [z][x] grid (pipeline/types.ts ElasticModel layout), top to bottom", () => {
    const grid = { nx: 4, nz: 3, spacingM: 0.5, originX: 10, originZ: 0 };
    const values = Float32Array.from({ length: 12 }, (_, i) => i);
    const p = depthProfile(values, grid, 11.1); // nearest column: 11.0 m = column 2
    expect(p.x).toBe(11);
    expect(p.depths).toEqual([0, 0.5, 1]);
    expect(p.values).toEqual([2, 6, 10]);
  });
});

describe("traces as the stage's measure sees them", () => {
  const ns = 400;
  const dt = 0.001;
  const f = 25; // 10 whole periods in 0.4 s
  const sin = Float32Array.from({ length: ns }, (_, k) => Math.sin(2 * Math.PI * f * k * dt));
  const cos = Float32Array.from({ length: ns }, (_, k) => Math.cos(2 * Math.PI * f * k * dt));

  it("unit-norm traces have L2 norm 1; a dead trace stays zero", () => {
    const rand = seededRandom(7).uniform;
    const data = new Float32Array(3 * ns);
    for (let i = 0; i < ns; i++) data[i] = 5 * (rand() - 0.5);
    data.set(sin, ns);
    const u = unitNormTraces(data, 3, ns);
    for (const t of [0, 1]) {
      let e = 0;
      for (let k = 0; k < ns; k++) e += u[t * ns + k] ** 2;
      expect(Math.sqrt(e)).toBeCloseTo(1, 5);
    }
    expect(u.subarray(2 * ns).every((v) => v === 0)).toBe(true);
  });

  const halfEnergy = (r: Float32Array) => 0.5 * r.reduce((s, v) => s + v * v, 0);

  it("normalised correlation is blind to amplitude: a scaled copy leaves no residual", () => {
    const syn = Float32Array.from(sin, (v) => 3.7 * v);
    const m = measuredTraces("normalised-correlation", sin, syn, 1, ns);
    expect(halfEnergy(m.residual)).toBeLessThan(1e-10);
    expect(m.explanation).toMatch(/unit-norm/);
  });

  it("½‖ŝ − d̂‖² = 1 − ŝ·d̂: 2 for a sign flip, 1 for sine against cosine over whole periods", () => {
    expect(halfEnergy(measuredTraces("normalised-correlation", sin, Float32Array.from(sin, (v) => -0.2 * v), 1, ns).residual)).toBeCloseTo(2, 5);
    expect(halfEnergy(measuredTraces("trace-normalised-least-squares", sin, cos, 1, ns).residual)).toBeCloseTo(1, 4);
  });

  it("agrees with the engine's trace-normalised least-squares misfit (½ Σ residual²), window and trace weights included", () => {
    const rand = seededRandom(11).uniform;
    const traces = 5;
    const obs = Float32Array.from({ length: traces * ns }, () => rand() - 0.5);
    const syn = Float32Array.from({ length: traces * ns }, () => rand() - 0.5);
    const compared = [true, false, true, true, false];
    const m = measuredTraces("trace-normalised-least-squares", obs, syn, traces, ns, 40, 300, compared);
    const engine = misfitAndAdjoint({
      measure: "trace-normalised-least-squares",
      synthetic: syn,
      observed: obs,
      traceCount: traces,
      sampleCount: ns,
      weights: Float32Array.from(compared, (c) => (c ? 1 : 0)),
      firstSample: 40,
      endSample: 300,
    });
    expect(halfEnergy(m.residual)).toBeCloseTo(engine.misfit, 4);
    // Outside the window nothing is drawn.
    expect(m.residual.subarray(0, 40).every((v) => v === 0)).toBe(true);
    expect(m.residual.subarray(1 * ns, 2 * ns).every((v) => v === 0)).toBe(true);
  });

  it("least squares draws the samples as they are; the envelope measure draws envelopes (≈ 1 for a cosine)", () => {
    const ls = measuredTraces("least-squares", sin, cos, 1, ns);
    expect(ls.residual[10]).toBeCloseTo(cos[10] - sin[10], 6);
    const env = measuredTraces("envelope", cos, cos, 1, ns);
    for (let k = 100; k < 300; k += 20) expect(env.observed[k]).toBeCloseTo(1, 2);
  });

  it("turns a stage's window in ms into samples like the inversion step (end sample inclusive of windowEndMs)", () => {
    expect(windowSamples({ windowStartMs: 0, windowEndMs: 300 }, 0, 0.00025, 4000)).toEqual({ first: 0, end: 1201 });
    expect(windowSamples({ windowStartMs: 20 }, -0.01, 0.001, 500)).toEqual({ first: 30, end: 500 });
    expect(windowSamples(undefined, 0, 0.001, 500)).toEqual({ first: 0, end: 500 });
  });
});

describe("list editor of the rerun form", () => {
  const stages = describeParams(getStep("waveform-inversion")).find((d) => d.name === "stages")!;

  it("describes the stages' fields from the step's zod schema", () => {
    expect(stages.items?.map((d) => d.name)).toEqual(expect.arrayContaining(["lowPassHz", "measure", "iterations", "minOffsetM", "windowEndMs", "reestimateWavelet"]));
    const measure = stages.items!.find((d) => d.name === "measure")!;
    expect(measure.type).toBe("enum");
    expect(measure.choices).toContain("normalised-correlation");
  });

  it("moves, removes and adds items without changing the original list", () => {
    const list = [{ a: 1 }, { a: 2 }, { a: 3 }];
    expect(moveItem(list, 0, 2)).toEqual([{ a: 2 }, { a: 3 }, { a: 1 }]);
    expect(moveItem(list, 2, 1)).toEqual([{ a: 1 }, { a: 3 }, { a: 2 }]);
    expect(moveItem(list, 0, -1)).toEqual(list);
    expect(removeItem(list, 1)).toEqual([{ a: 1 }, { a: 3 }]);
    expect(list).toEqual([{ a: 1 }, { a: 2 }, { a: 3 }]);
    expect(newItem(stages.items!, [{ lowPassHz: 30 }])).toEqual({ lowPassHz: 30 });
    expect(newItem(stages.items!, [])).toMatchObject({ filterOrder: 6, measure: "normalised-correlation", iterations: 8 });
  });

  it("reads boxes and checks the schema's limits", () => {
    const iterations = stages.items!.find((d) => d.name === "iterations")!;
    const windowEnd = stages.items!.find((d) => d.name === "windowEndMs")!;
    expect(fieldValue(iterations, "12")).toBe(12);
    expect(fieldValue(windowEnd, "")).toBeUndefined();
    expect(fieldProblem(iterations, -1)).toBe("At least 0.");
    expect(fieldProblem(iterations, 0)).toBeNull();
    expect(fieldProblem(iterations, 2.5)).toBe("Enter a whole number.");
    expect(fieldProblem(iterations, 201)).toBe("At most 200.");
    expect(fieldProblem(windowEnd, undefined)).toBeNull();
    expect(fieldProblem(stages.items!.find((d) => d.name === "lowPassHz")!, undefined)).toBe("Required.");
  });

  it("labels fields with their unit from the name", () => {
    expect([unitOfName("lowPassHz"), unitOfName("windowEndMs"), unitOfName("maxOffsetM"), unitOfName("iterations")]).toEqual(["Hz", "ms", "m", null]);
    expect(labelOfName("lowPassHz")).toBe("low pass");
    expect(labelOfName("stopBelowRelativeChange")).toBe("stop below relative change");
  });
});
