import { describe, expect, it } from "vitest";
import { misfitStep, type MisfitReport } from "../../../pipeline/steps/misfit";
import { StepInputError } from "../../../pipeline/step";
import { decodeArtifact, encodeArtifact } from "../../../pipeline/artifact-codec";
import { describeParams, getStep, listSteps } from "../../../pipeline/registry";
import type { Gather, GatherSet } from "../../../pipeline/types";
import { makeStepContext } from "../../helpers/step-context";
import { seededRandom } from "../../helpers/random";
import { makeGather, ricker } from "./make-gather";
import { forwardModelStep } from "../../../pipeline/steps/forward-model";
import { buildModel } from "../../../pipeline/kernels/fd/model-grid";

const DT = 0.0005;
const NS = 600;
const TRACES = 8;

/** Two shots of `TRACES` receivers, 1 m apart, seeded noise plus a Ricker arrival moving out with offset. */
function observedGathers(seed = 3): Gather[] {
  const rnd = seededRandom(seed);
  const shot = (id: string, sourceX: number) =>
    makeGather({ id, sourceX, traceCount: TRACES, sampleCount: NS, sampleIntervalS: DT, startTimeS: -0.01 }, (_t, s, h) => ricker(s - 0.05 - Math.abs(h.offset) / 200, 30) + 0.05 * rnd.gaussian());
  return [shot("sp01", -1), shot("sp13", 23)];
}

/** A synthetic set derived from the observed gathers sample by sample. */
function derived(obs: Gather[], f: (v: number, trace: number, sample: number, g: Gather) => number): Gather[] {
  return obs.map((g) => {
    const data = new Float32Array(g.data.length);
    for (let t = 0; t < g.traces.length; t++) for (let i = 0; i < g.sampleCount; i++) data[t * g.sampleCount + i] = f(g.data[t * g.sampleCount + i], t, i, g);
    return { ...g, traces: g.traces.map((h) => ({ ...h })), data };
  });
}

const set = (gathers: Gather[]): GatherSet => ({ kind: "gathers", gathers });

async function runMisfit(obs: Gather[], syn: Gather[], settings: Record<string, unknown> = {}) {
  const res = await misfitStep.run({ gathers: set(obs), synthetic: set(syn) }, misfitStep.params.parse(settings), makeStepContext());
  return { res, report: res.outputs.report!.data as MisfitReport };
}

describe("misfit step", () => {
  it("is 0 for identical gathers and 2 per trace for reversed polarity at any scale (Choi & Alkhalifah 2012 convention, shifted)", async () => {
    const obs = observedGathers();
    const same = await runMisfit(obs, derived(obs, (v) => v));
    expect(same.report.measure).toBe("normalised-correlation");
    expect(same.res.outputs.report!.role).toBe("misfit");
    expect(Math.abs(same.report.total)).toBeLessThan(1e-10);
    const reversed = await runMisfit(obs, derived(obs, (v) => -250 * v));
    // ĉ = −1 exactly in exact arithmetic; Float32 scaling leaves ~1e-7 per trace; tolerance 1e-5.
    expect(Math.abs(reversed.report.total - 2 * 2 * TRACES)).toBeLessThan(1e-5);
    expect(reversed.res.summary).toMatchObject({ measure: "normalised-correlation", traces: 2 * TRACES, gathers: 2 });
  });

  it("per-trace values add up to the gather values and the total; series carry offsets and source positions", async () => {
    const obs = observedGathers();
    const rnd = seededRandom(99);
    const syn = derived(obs, (v) => 0.7 * v + 0.1 * rnd.gaussian());
    for (const measure of ["least-squares", "normalised-correlation", "envelope"] as const) {
      const { res, report } = await runMisfit(obs, syn, { measure });
      expect(report.perTrace).toHaveLength(2 * TRACES);
      let sum = 0;
      for (const g of report.perGather) {
        const part = report.perTrace.filter((p) => p.gatherId === g.gatherId).reduce((a, p) => a + p.value, 0);
        expect(Math.abs(part - g.value)).toBeLessThanOrEqual(1e-12 * Math.abs(g.value));
        sum += part;
      }
      expect(Math.abs(sum - report.total)).toBeLessThanOrEqual(1e-12 * report.total);
      expect(report.total).toBeGreaterThan(0);
      expect(res.summary?.total).toBe(report.total);
      const byOffset = res.series!.find((s) => s.name === "misfit-by-offset")!;
      expect(byOffset.points).toHaveLength(2 * TRACES);
      expect(byOffset.points[TRACES + 2]).toEqual({ x: obs[1].traces[2].offset, y: report.perTrace[TRACES + 2].value, group: "sp13" });
      const byGather = res.series!.find((s) => s.name === "misfit-by-gather")!;
      expect(byGather.points.map((p) => p.x)).toEqual([-1, 23]);
      expect(byGather.points.map((p) => p.y)).toEqual(report.perGather.map((g) => g.value));
      // The report is plain data and survives the artifact encoding unchanged.
      expect(decodeArtifact(encodeArtifact(res.outputs.report))).toEqual(res.outputs.report);
    }
  });

  it("least squares without normalisation matches the Ricker energy in closed form", async () => {
    // syn = 2·obs with obs a Ricker wavelet: ½Σ(2r − r)² = ½Σr² ≈ ½ R(0)/Δt with the Ricker energy
    // R(0) = ∫r² dt = 3√(2π)/(8πf) (Gaussian integral; derivation in tests/pipeline/kernels/misfit.test.ts).
    const peakHz = 30;
    const obs = [makeGather({ id: "sp05", traceCount: 1, sampleCount: NS, sampleIntervalS: DT }, (_t, s) => ricker(s - 0.1, peakHz))];
    const { report } = await runMisfit(obs, derived(obs, (v) => 2 * v), { measure: "least-squares", normaliseTraces: false });
    const want = (0.5 * (3 * Math.sqrt(2 * Math.PI)) / (8 * Math.PI * peakHz)) / DT;
    // Float32 samples; measured relative error 1.1e-8, tolerance 1e-6.
    expect(Math.abs(report.total - want) / want).toBeLessThan(1e-6);
    expect(report.normaliseTraces).toBe(false);
    // Normalised, the factor 2 drops out entirely.
    const normalised = await runMisfit(obs, derived(obs, (v) => 2 * v), { measure: "least-squares" });
    expect(normalised.report.total).toBeLessThan(1e-12);
  });

  it("envelope misfit of a Gaussian-modulated cosine against a phase-rotated copy is ½(A − B)² Σg²", async () => {
    // Envelopes: A·g and B·g (Bedrosian 1963 product theorem; the carrier phase drops out), so the
    // misfit is ½(A − B)²Σg² and Σg² ≈ σ√π/Δt for g = exp(−(t − t0)²/(2σ²)) (Gaussian integral).
    const sigma = 0.02;
    const g = (s: number) => Math.exp(-((s - 0.15) ** 2) / (2 * sigma * sigma));
    const obs = [makeGather({ id: "sp07", traceCount: 2, sampleCount: NS, sampleIntervalS: DT }, (_t, s) => 1.0 * g(s) * Math.cos(2 * Math.PI * 80 * s))];
    const syn = [makeGather({ id: "sp07", traceCount: 2, sampleCount: NS, sampleIntervalS: DT }, (_t, s) => 1.6 * g(s) * Math.sin(2 * Math.PI * 80 * s + 0.4))];
    const { report } = await runMisfit(obs, syn, { measure: "envelope" });
    const want = 2 * 0.5 * 0.6 ** 2 * ((sigma * Math.sqrt(Math.PI)) / DT);
    // Spectral leakage of the Gaussian past 0 Hz is e^(−(80/8)²/2), nil; Float32 rounding remains:
    // measured relative error 1.4e-8, tolerance 1e-6.
    expect(Math.abs(report.total - want) / want).toBeLessThan(1e-6);
    expect(report.normaliseTraces).toBeNull();
  });

  it("compares only the time window", async () => {
    const obs = observedGathers();
    // Differences only before 40 ms and after 200 ms (after the source instant).
    const syn = derived(obs, (v, _t, i, g) => {
      const s = g.startTimeS + i * g.sampleIntervalS;
      return s < 0.04 || s > 0.2 ? v + 1 : v;
    });
    const inside = await runMisfit(obs, syn, { measure: "least-squares", normaliseTraces: false, windowStartMs: 40, windowEndMs: 200 });
    expect(inside.report.total).toBe(0);
    expect(inside.report.window).toEqual({ startS: 0.04, endS: 0.2 });
    // 40 ms after a −10 ms start at 0.5 ms: sample 100; 200 ms: sample 420 (inclusive), so 321 samples.
    expect(inside.report.perGather[0]).toMatchObject({ firstSample: 100, endSample: 421 });
    const all = await runMisfit(obs, syn, { measure: "least-squares", normaliseTraces: false });
    // Every sample outside the window differs by 1: ½ · (600 − 321) per trace. Float32 storage of
    // v + 1 rounds each difference by up to 1.2e-7 (relative); measured 3e-10 overall, tolerance 1e-6.
    const want = 2 * TRACES * 0.5 * (NS - 321);
    expect(Math.abs(all.report.total - want) / want).toBeLessThan(1e-6);
  });

  it("skips dead traces by default, lists them, and counts silent traces as uncorrelated when asked to keep them", async () => {
    const obs = observedGathers();
    obs[0].traces[3].dead = true;
    obs[0].data.fill(0, 3 * NS, 4 * NS);
    const syn = derived(obs, (v) => v);
    syn[0].traces[3].dead = false; // forward-model models every trace
    syn[0].data.fill(0.5, 3 * NS, 4 * NS);
    const skip = await runMisfit(obs, syn);
    expect(skip.report.traces).toBe(2 * TRACES - 1);
    expect(skip.report.skipped).toEqual([{ gatherId: "sp01", traceIndex: 3, reason: "dead (observed)" }]);
    expect(skip.report.perTrace.some((p) => p.gatherId === "sp01" && p.traceIndex === 3)).toBe(false);
    const keep = await runMisfit(obs, syn, { skipDeadTraces: false });
    expect(keep.report.traces).toBe(2 * TRACES);
    expect(keep.report.silentTraces).toEqual([{ gatherId: "sp01", traceIndex: 3, which: "observed" }]);
    expect(keep.report.perTrace.find((p) => p.gatherId === "sp01" && p.traceIndex === 3)?.value).toBe(1);
  });

  it("refuses mismatched geometry and sampling, naming the gather and what differs", async () => {
    const obs = observedGathers();
    const refuse = async (syn: Gather[], pattern: RegExp) => {
      const err = await runMisfit(obs, syn).then(
        () => null,
        (e: unknown) => e,
      );
      expect(err).toBeInstanceOf(StepInputError);
      expect((err as Error).message).toMatch(pattern);
    };
    const moved = derived(obs, (v) => v);
    moved[1].traces[5].receiverX += 0.5;
    await refuse(moved, /gather "sp13".*trace 5 \(channel 6\): receiver at x 5\.5 m.*against x 5 m.*tolerance 0\.01 m/);
    // Within tolerance is accepted.
    const nudged = derived(obs, (v) => v);
    nudged[1].traces[5].receiverX += 0.005;
    await expect(runMisfit(obs, nudged)).resolves.toBeTruthy();
    const source = derived(obs, (v) => v);
    source[0].traces[0].sourceX = 0;
    await refuse(source, /gather "sp01".*source at x 0 m.*against x -1 m/);
    await refuse(
      obs.map((g) => ({ ...g, sampleIntervalS: 0.00025 })),
      /gather "sp01".*sample interval 0\.25 ms \(synthetic\) against 0\.5 ms \(observed\)/,
    );
    await refuse(
      obs.map((g) => ({ ...g, sampleCount: NS - 1, data: g.data.subarray(0, TRACES * (NS - 1)) })),
      /gather "sp01".*599 samples per trace \(synthetic\) against 600/,
    );
    await refuse(
      obs.map((g) => ({ ...g, startTimeS: 0 })),
      /gather "sp01".*first sample at 0 ms \(synthetic\) against -10 ms/,
    );
    await refuse(
      obs.map((g) => ({ ...g, traces: g.traces.slice(0, 7), data: g.data.subarray(0, 7 * NS) })),
      /gather "sp01".*7 traces \(synthetic\) against 8/,
    );
    await refuse(
      obs.map((g) => ({ ...g, traces: g.traces.map((h) => ({ ...h, component: "y" as const })) })),
      /component "y" \(synthetic\) against "z"/,
    );
    const broken = derived(obs, (v) => v);
    broken[1].data[4 * NS + 17] = Number.NaN;
    await refuse(broken, /gather "sp13", trace 4 \(channel 5\): the observed or synthetic samples hold NaN/);
    await refuse([obs[0]], /gather "sp13" has no synthetic gather of the same id; synthetic gathers: "sp01"/);
    await refuse([obs[0], obs[0], obs[1]], /id "sp01" twice/);
  });

  it("refuses a window outside the traces and bad settings", async () => {
    const obs = observedGathers();
    await expect(runMisfit(obs, obs, { windowStartMs: 400, windowEndMs: 500 })).rejects.toThrow(/gather "sp01": the window 400 ms to 500 ms holds no sample of its traces \(-10 ms to 289\.5 ms\)/);
    const bad = misfitStep.params.safeParse({ windowStartMs: 100, windowEndMs: 50 });
    expect(bad.success).toBe(false);
    expect(bad.error?.issues[0].path).toEqual(["windowEndMs"]);
    expect(misfitStep.params.safeParse({ measure: "l1" }).success).toBe(false);
  });

  it("reports synthetic gathers with no observed partner without comparing them", async () => {
    const obs = observedGathers();
    const extra = { ...obs[0], id: "sp25" };
    const { report, res } = await runMisfit([obs[0]], [obs[0], extra]);
    expect(report.unmatchedSynthetic).toEqual(["sp25"]);
    expect(report.perGather.map((g) => g.gatherId)).toEqual(["sp01"]);
    expect(res.summary).toMatchObject({ unmatchedSynthetic: 1 });
  });

  it("is registered after forward-model with documented parameters", () => {
    const ids = listSteps().map((s) => s.id);
    expect(ids.indexOf("misfit")).toBe(ids.indexOf("forward-model") + 1);
    const docs = describeParams(getStep("misfit"));
    expect(docs.map((d) => d.name).sort()).toEqual(["measure", "normaliseTraces", "positionToleranceM", "skipDeadTraces", "windowEndMs", "windowStartMs"]);
    for (const d of docs) {
      expect(d.optional, d.name).toBe(true);
      expect(d.description.length, d.name).toBeGreaterThan(20);
      if (/Ms$/.test(d.name)) expect(d.description).toContain("ms");
      if (/M$/.test(d.name)) expect(d.description).toContain("m");
    }
    expect(misfitStep.params.parse({})).toEqual({ measure: "normalised-correlation", normaliseTraces: true, skipDeadTraces: true, positionToleranceM: 0.01 });
  });

  it("pairs with forward-model's synthetics: 0 for the model that made the data, growing with offset for a faster one", async () => {
    // Small in-process modelling (no pool): 2 shots of 12 receivers, 0.5 m grid, 25 Hz Ricker,
    // receivers clear of the absorbing strips and records (0.29 s) long enough for the surface wave
    // to reach the farthest receiver.
    const grid = { originX: -10, originZ: 0, spacingM: 0.5, nx: 101, nz: 25 };
    const truth = buildModel(grid, [{ topM: 0, vp: 500, vs: 180, rho: 1800, vsGradient: 10 }]);
    const faster = buildModel(grid, [{ topM: 0, vp: 530, vs: 190, rho: 1800, vsGradient: 10 }]);
    const field: GatherSet = set(
      [["sp01", -1], ["sp13", 23]].map(([id, sourceX]) =>
        makeGather({ id: id as string, sourceX: sourceX as number, traceCount: 12, sampleCount: 600, sampleIntervalS: 0.0005, startTimeS: -0.01, firstReceiverX: 0, receiverSpacingM: 2 }),
      ),
    );
    const fm = forwardModelStep.params.parse({ rickerPeakHz: 25, pmlCells: 10 });
    const observed = (await forwardModelStep.run({ model: truth, gathers: field }, fm, makeStepContext())).outputs.synthetic!.gathers;
    const again = (await forwardModelStep.run({ model: truth, gathers: field }, fm, makeStepContext())).outputs.synthetic!.gathers;
    const wrong = (await forwardModelStep.run({ model: faster, gathers: field }, fm, makeStepContext())).outputs.synthetic!.gathers;
    // The solver is deterministic, so the same model gives the same traces: misfit 0 (to rounding).
    const same = await runMisfit(observed, again);
    expect(same.report.total).toBeLessThan(1e-9);
    const off = await runMisfit(observed, wrong);
    expect(off.report.total).toBeGreaterThan(0.01);
    // A 5 % faster medium shifts arrivals by about |x|·(1/v1 − 1/v2), growing with offset (common
    // practice, kinematics), here below the half period where the correlation misfit of a shifted
    // wavelet stops growing; so each trace's misfit grows with |offset| (measured 0.003 at 1 m to
    // 0.70 at 23 m).
    for (const g of off.report.perGather) {
      const rows = off.report.perTrace.filter((p) => p.gatherId === g.gatherId).sort((a, b) => Math.abs(a.offset) - Math.abs(b.offset));
      for (let k = 1; k < rows.length; k++) expect(rows[k].value, `${g.gatherId} offset ${rows[k].offset} m`).toBeGreaterThan(rows[k - 1].value);
    }
  });
});
