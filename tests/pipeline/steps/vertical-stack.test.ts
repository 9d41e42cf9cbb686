/**
 * Step "vertical-stack". References: the variance of a mean of independent variables (sqrt(N)
 * noise reduction, any statistics textbook; common practice for vertical stacking), the
 * inverse-variance weighted mean (Bevington & Robinson), the asymptotic efficiency 2/pi of the
 * median (Kendall & Stuart), and the step's documented grouping and dead-channel rules.
 */
import { describe, expect, it } from "vitest";
import { verticalStackParams, verticalStackStep, stackGatherId, type StackReport } from "../../../pipeline/steps/vertical-stack";
import { StepInputError } from "../../../pipeline/step";
import type { Gather, TraceHeader } from "../../../pipeline/types";
import { seededRandom } from "../../helpers/random";
import { makeStepContext } from "../../helpers/step-context";

interface BlowSpec {
  sourcePoint: number;
  blow: number;
  sourceX: number;
  sigma: number;
  /** Channels (1-based) whose samples are all zero in this blow. */
  deadChannels?: number[];
}

const DT = 0.001;

/** Ricker wavelet of peak frequency f at time tau from its centre (shape only, as a clean signal). */
function ricker(f: number, tau: number): number {
  const a = (Math.PI * f * tau) ** 2;
  return (1 - 2 * a) * Math.exp(-a);
}

/** The clean signal of channel c: a 30 Hz Ricker arriving at |offset| / 300 m/s + 0.03 s. */
function cleanTrace(sourceX: number, receiverX: number, sampleCount: number, startTimeS: number): Float32Array {
  const out = new Float32Array(sampleCount);
  const arrival = Math.abs(receiverX - sourceX) / 300 + 0.03;
  for (let s = 0; s < sampleCount; s++) out[s] = ricker(30, startTimeS + s * DT - arrival);
  return out;
}

function makeGathers(specs: BlowSpec[], opts: { traces: number; samples: number; startTimeS: number; seed: number }): Gather[] {
  const rng = seededRandom(opts.seed);
  return specs.map((sp) => {
    const traces: TraceHeader[] = [];
    const data = new Float32Array(opts.traces * opts.samples);
    for (let c = 1; c <= opts.traces; c++) {
      const receiverX = c - 1;
      traces.push({
        sourceFile: `p${sp.sourcePoint}-b${sp.blow}.sg2`,
        channel: c,
        sourcePoint: sp.sourcePoint,
        blow: sp.blow,
        sourceX: sp.sourceX,
        sourceZ: 0,
        receiverX,
        receiverZ: 0,
        offset: receiverX - sp.sourceX,
        stackCount: 1,
        component: "z",
        dead: false,
      });
      if (sp.deadChannels?.includes(c)) continue;
      const clean = cleanTrace(sp.sourceX, receiverX, opts.samples, opts.startTimeS);
      const base = (c - 1) * opts.samples;
      for (let s = 0; s < opts.samples; s++) data[base + s] = clean[s] + sp.sigma * rng.gaussian();
    }
    return { id: `p${sp.sourcePoint}-b${sp.blow}`, sampleIntervalS: DT, sampleCount: opts.samples, startTimeS: opts.startTimeS, traces, data };
  });
}

async function run(gathers: Gather[], settings: Record<string, unknown> = {}) {
  const result = await verticalStackStep.run({ gathers: { kind: "gathers", gathers } }, verticalStackParams.parse(settings), makeStepContext());
  const report = result.outputs.report!;
  expect(report.role).toBe("stack");
  return { gathers: result.outputs.gathers!.gathers, report: report.data as StackReport, result };
}

function rmsError(g: Gather, sourceX: number): number {
  let sum = 0;
  for (let t = 0; t < g.traces.length; t++) {
    const clean = cleanTrace(sourceX, g.traces[t].receiverX, g.sampleCount, g.startTimeS);
    for (let s = 0; s < g.sampleCount; s++) sum += (g.data[t * g.sampleCount + s] - clean[s]) ** 2;
  }
  return Math.sqrt(sum / g.data.length);
}

const blowsAt = (sourcePoint: number, sourceX: number, sigmas: number[]): BlowSpec[] =>
  sigmas.map((sigma, i) => ({ sourcePoint, blow: i + 1, sourceX, sigma }));

describe("vertical-stack step", () => {
  it("has documented defaults", () => {
    expect(verticalStackParams.parse({})).toEqual({ method: "weighted", groupBy: "source-point", positionToleranceM: 0.25, downWeightedBelow: 0.5, noiseWindowMinSamples: 16 });
    expect(stackGatherId(7)).toBe("sp07");
    expect(stackGatherId(123)).toBe("sp123");
  });

  it("makes one gather per source point with stackCount = blows and blow = 0, in source-point order", async () => {
    const specs = [...blowsAt(12, 23, [0.1, 0.1, 0.1]), ...blowsAt(7, 13, [0.1, 0.1, 0.1, 0.1])];
    const input = makeGathers(specs, { traces: 4, samples: 200, startTimeS: -0.02, seed: 1 });
    const { gathers, report, result } = await run(input, { method: "mean" });
    expect(gathers.map((g) => g.id)).toEqual(["sp07", "sp12"]);
    expect(gathers[0].traces.every((t) => t.stackCount === 4 && t.blow === 0 && t.sourcePoint === 7 && !t.dead)).toBe(true);
    expect(gathers[1].traces.every((t) => t.stackCount === 3)).toBe(true);
    // Signed offset receiverX - sourceX (types.ts contract).
    expect(gathers[0].traces.map((t) => t.offset)).toEqual([-13, -12, -11, -10]);
    expect(gathers[0].traces[0].sourceFile).toBe("p7-b1.sg2+p7-b2.sg2+p7-b3.sg2+p7-b4.sg2");
    expect(report.sourcePoints.map((s) => [s.gatherId, s.blowCount])).toEqual([["sp07", 4], ["sp12", 3]]);
    expect(result.summary).toMatchObject({ sourcePoints: 2, blows: 7, method: "mean" });
    // Mean stack = sample-by-sample average of the blows (definition).
    const b = input.filter((g) => g.traces[0].sourcePoint === 7);
    const k = 2 * 200 + 57;
    expect(gathers[0].data[k]).toBeCloseTo((b[0].data[k] + b[1].data[k] + b[2].data[k] + b[3].data[k]) / 4, 6);
    // Inputs not mutated.
    expect(input[0].traces[0].blow).toBe(1);
  });

  it("measures a noise reduction near sqrt(N) in the pre-trigger window for independent noise", async () => {
    // 24 traces x 100 pre-trigger samples = 2400 noise samples per blow: the relative standard
    // error of a noise power is sqrt(2/2400) = 2.9 %, of the gain (ratio of square roots) about
    // 2 %; 8 % tolerance.
    const specs = [...blowsAt(1, -1, [0.2]), ...blowsAt(2, 1, new Array(4).fill(0.2)), ...blowsAt(3, 3, new Array(16).fill(0.2))];
    const input = makeGathers(specs, { traces: 24, samples: 300, startTimeS: -0.1, seed: 2 });
    const { report } = await run(input, { method: "mean" });
    const [one, four, sixteen] = report.sourcePoints;
    expect(one.noise).toMatchObject({ estimator: "single-blow", snrGain: 1, independentNoiseGain: 1 });
    expect(four.noise.estimator).toBe("pre-trigger-window");
    expect(four.noise.windowSamples).toBe(100);
    // Variance of a mean of N independent variables: noise RMS / sqrt(N).
    expect(Math.abs(four.noise.snrGain! / 2 - 1)).toBeLessThan(0.08);
    expect(Math.abs(sixteen.noise.snrGain! / 4 - 1)).toBeLessThan(0.08);
    expect(four.noise.independentNoiseGain).toBe(2);
    expect(Math.abs(four.noise.singleBlowNoiseRms! / 0.2 - 1)).toBeLessThan(0.05);
  });

  it("estimates the gain from the spread between blows when there is no pre-trigger window", async () => {
    // 24 x 400 samples per blow; Grubbs estimates and the stack variance from the weights; 8 %.
    const input = makeGathers(blowsAt(4, 5, new Array(9).fill(0.2)), { traces: 24, samples: 400, startTimeS: 0, seed: 3 });
    const mean = (await run(input, { method: "mean" })).report.sourcePoints[0].noise;
    expect(mean.estimator).toBe("between-blows");
    expect(Math.abs(mean.snrGain! / 3 - 1)).toBeLessThan(0.08);
    const weighted = (await run(input)).report.sourcePoints[0].noise;
    expect(weighted.estimator).toBe("between-blows");
    expect(Math.abs(weighted.snrGain! / 3 - 1)).toBeLessThan(0.08);
    const med = (await run(input, { method: "median" })).report.sourcePoints[0].noise;
    expect(med.estimator).toBe("none");
    expect(med.snrGain).toBeNull();
    expect(med.note).toContain("median");
  });

  it("median stack: pre-trigger gain close to the exact median efficiency, expected figure sqrt(2N/pi)", async () => {
    const input = makeGathers(blowsAt(5, 7, new Array(9).fill(0.2)), { traces: 24, samples: 300, startTimeS: -0.1, seed: 4 });
    const noise = (await run(input, { method: "median" })).report.sourcePoints[0].noise;
    // Asymptotic relative efficiency 2/pi (Kendall & Stuart): expected sqrt(2N/pi) = 2.39 for N = 9.
    expect(noise.independentNoiseGain).toBeCloseTo(Math.sqrt(18 / Math.PI), 12);
    // For finite N the median does slightly better than the asymptote (variance of the median of
    // 9 normals 0.1661 sigma^2 from the order-statistic density, as computed in the kernel tests;
    // gain 1/sqrt(0.1661) = 2.45). 8 % tolerance as above.
    expect(Math.abs(noise.snrGain! / 2.45 - 1)).toBeLessThan(0.08);
  });

  it("down-weights a blow with 10x noise and comes much closer to the clean signal than the mean", async () => {
    const specs = blowsAt(9, 17, [0.1, 0.1, 1.0, 0.1]);
    const input = makeGathers(specs, { traces: 12, samples: 300, startTimeS: -0.02, seed: 5 });
    const weighted = await run(input);
    const mean = await run(input, { method: "mean" });
    const sp = weighted.report.sourcePoints[0];
    expect(sp.downWeighted).toEqual(["p9-b3"]);
    expect(sp.blows[2].relativeWeight!).toBeLessThan(0.05);
    expect(sp.blows[2].downWeightedChannels).toBe(12);
    expect(sp.blows[0].relativeWeight!).toBeGreaterThan(1);
    const eW = rmsError(weighted.gathers[0], 17);
    const eM = rmsError(mean.gathers[0], 17);
    // Mean: sqrt(3 * 0.01 + 1) / 4 = 0.254 (variance of a sum); weighted near 0.1 / sqrt(3) = 0.058 (inverse-variance weighted mean).
    expect(eM).toBeGreaterThan(0.2);
    expect(eW).toBeLessThan(0.058 * 1.25);
    expect(mean.report.sourcePoints[0].blows.every((b) => b.relativeWeight === 1)).toBe(true);
    expect(mean.report.sourcePoints[0].downWeighted).toEqual([]);
  });

  it("keeps a channel dead in every blow dead, and leaves a blow's dead channel out of the stack", async () => {
    const specs: BlowSpec[] = [
      { sourcePoint: 2, blow: 1, sourceX: 0, sigma: 0.05, deadChannels: [3] },
      { sourcePoint: 2, blow: 2, sourceX: 0, sigma: 0.05, deadChannels: [3, 5] },
      { sourcePoint: 2, blow: 3, sourceX: 0, sigma: 0.05, deadChannels: [3] },
    ];
    const input = makeGathers(specs, { traces: 6, samples: 200, startTimeS: -0.02, seed: 6 });
    input[0].traces[5].dead = true; // flagged dead (channel 6 of blow 1), samples not zero
    for (const method of ["mean", "median", "weighted"]) {
      const { gathers, report } = await run(input, { method });
      const g = gathers[0];
      expect(g.traces[2].dead).toBe(true);
      expect(g.data.subarray(2 * 200, 3 * 200).every((v) => v === 0)).toBe(true);
      expect(g.traces[2].stackCount).toBe(3);
      expect(g.traces[4].stackCount).toBe(2);
      expect(g.traces[5].stackCount).toBe(2);
      expect(g.traces[4].dead).toBe(false);
      expect(report.sourcePoints[0].deadChannels).toEqual([3]);
      expect(report.sourcePoints[0].blows.map((b) => b.deadChannels)).toEqual([2, 2, 1]);
      if (method === "mean") {
        // Channel 5: average of blows 1 and 3 only (blow 2 left out).
        const k = 4 * 200 + 80;
        expect(g.data[k]).toBeCloseTo((input[0].data[k] + input[2].data[k]) / 2, 6);
      }
    }
  });

  it("warns about blows of one source point lying apart, and stacks them at the median position", async () => {
    const specs = [...blowsAt(6, 11, [0.1, 0.1]), { sourcePoint: 6, blow: 3, sourceX: 13, sigma: 0.1 }];
    const input = makeGathers(specs, { traces: 4, samples: 100, startTimeS: 0, seed: 7 });
    const { gathers, report, result } = await run(input);
    const sp = report.sourcePoints[0];
    expect(sp.positionWarning).toBe(true);
    expect(sp.sourceXSpreadM).toBe(2);
    expect(sp.sourceXM).toBe(11);
    expect(gathers[0].traces[0].sourceX).toBe(11);
    expect(result.summary).toMatchObject({ positionWarnings: 1 });
    // Grouped by position, the blows of a group lie together by construction: no count of position
    // warnings when there are none (still one when a group was merged by number anyway, as above);
    // a mean stack down-weights nothing: no such count either.
    expect((await run(input, { groupBy: "source-position" })).result.summary).toMatchObject({ positionWarnings: 1 });
    const together = makeGathers(blowsAt(6, 11, [0.1, 0.1, 0.1]), { traces: 4, samples: 100, startTimeS: 0, seed: 7 });
    const byPosition = await run(together, { groupBy: "source-position", method: "mean" });
    expect(byPosition.report.sourcePoints.every((r) => !r.positionWarning)).toBe(true);
    expect(Object.keys(byPosition.result.summary!)).not.toContain("positionWarnings");
    expect(Object.keys(byPosition.result.summary!)).not.toContain("downWeightedBlows");
    expect(byPosition.result.summary).toMatchObject({ groupBy: "source-position", method: "mean" });
    expect((await run(input, { positionToleranceM: 2.5 })).report.sourcePoints[0].positionWarning).toBe(false);
  });

  it("refuses blows that differ in sample count, interval, start time or channel layout", async () => {
    const base = () => makeGathers(blowsAt(8, 0, [0.1, 0.1]), { traces: 3, samples: 50, startTimeS: 0, seed: 8 });
    const cases: Array<[(g: Gather[]) => void, RegExp]> = [
      [(g) => { g[1] = { ...g[1], sampleCount: 25, data: g[1].data.subarray(0, 75) }; }, /"p8-b1" and "p8-b2" of source point 8 differ in sample count \(50 and 25\)/],
      [(g) => { g[1].sampleIntervalS = 0.0005; }, /differ in sample interval \(1 ms and 0.5 ms\)/],
      [(g) => { g[1].startTimeS = -0.01; }, /differ in start time/],
      [(g) => { g[1].traces[1].channel = 9; }, /differ at trace 2: channel 2 \(z\) against channel 9 \(z\)/],
      [(g) => { g[1].traces[2].receiverX += 1; }, /place channel 3 at different receiver positions/],
    ];
    for (const [spoil, message] of cases) {
      const g = base();
      spoil(g);
      await expect(run(g)).rejects.toThrow(StepInputError);
      await expect(run(g)).rejects.toThrow(message);
    }
  });
});

describe("grouping by source position", () => {
  // Two blows of the source point at x = 4 m were logged as source point 3 (x = 6 m): grouped
  // by number they land in the wrong stack; grouped by position they join their true source
  // point (the step's documented grouping rule).
  const specs: BlowSpec[] = [
    { sourcePoint: 2, blow: 1, sourceX: 4, sigma: 0.05 },
    { sourcePoint: 2, blow: 2, sourceX: 4, sigma: 0.05 },
    { sourcePoint: 3, blow: 3, sourceX: 4, sigma: 0.05 },
    { sourcePoint: 3, blow: 4, sourceX: 4, sigma: 0.05 },
    { sourcePoint: 3, blow: 1, sourceX: 6, sigma: 0.05 },
    { sourcePoint: 3, blow: 2, sourceX: 6, sigma: 0.05 },
  ];
  const opts = { traces: 6, samples: 200, startTimeS: -0.02, seed: 77 };

  it("by source point, the mislabelled blows are stacked at the wrong place", async () => {
    const { gathers } = await run(makeGathers(specs, opts), { method: "mean", groupBy: "source-point" });
    expect(gathers.map((g) => [g.id, g.traces[0].stackCount])).toEqual([
      ["sp02", 2],
      ["sp03", 4],
    ]);
  });

  it("by source position, every blow joins the stack at its true position", async () => {
    const { gathers } = await run(makeGathers(specs, opts), { method: "mean", groupBy: "source-position" });
    expect(gathers.map((g) => [g.id, g.traces[0].stackCount, g.traces[0].sourceX])).toEqual([
      ["sp02", 4, 4],
      ["sp03", 2, 6],
    ]);
    // Four blows of noise sigma 0.05 stacked: the error is about 0.05/2 (sqrt(N), common practice).
    expect(rmsError(gathers[0], 4)).toBeLessThan((0.05 / 2) * 1.3);
  });
});
