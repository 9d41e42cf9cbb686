/**
 * Step "surface-wave-profile": inverts each window's fundamental-mode dispersion curve (the hand
 * pick when there is one, else the automatic pick) for a layered S-velocity profile by damped
 * least squares (Levenberg–Marquardt) over Rayleigh phase velocities of layers over a half-space
 * (pipeline/kernels/dispersion/rayleigh.ts). Vp follows from Vs by a Poisson's ratio, density by a
 * constant or Gardner's rule. Writes the profiles with their fits and depth of investigation
 * (`velocityProfiles`), and the `dispersion` slot again with each window's modelled curve added,
 * so a drawing finds image, picks and modelled curve in one artifact.
 */
import { z } from "zod";
import { defineStep, StepInputError, throwIfAborted } from "../step";
import type { DispersionCurve, DispersionSet, VelocityProfile, VelocityProfileSet } from "../types";
import { invertDispersionCurve, type CurveInversionOptions, type DensityRule } from "../kernels/dispersion/inversion";
import type { WorkerPool } from "../workers/pool";

export const surfaceWaveProfileParams = z
  .object({
    /** @default [] */
    layerThicknessesM: z
      .array(z.number().positive())
      .default([])
      .describe("Thickness of each layer above the half-space, top down, m; empty: layerCount layers growing by half each, together reaching the depth of investigation"),
    /** @default 4 */
    layerCount: z.number().int().min(1).max(12).default(4).describe("Number of layers above the half-space when layerThicknessesM is empty (count)"),
    /** @default false */
    freeThickness: z.boolean().default(false).describe("Invert for the layer thicknesses too (else they stay fixed)"),
    /** @default 0.3 */
    poissonRatio: z
      .number()
      .gt(0)
      .lt(0.5)
      .default(0.3)
      .describe("Poisson's ratio setting Vp from Vs: Vp = Vs·√((2 − 2ν)/(1 − 2ν)) (no unit)"),
    /** @default "constant" */
    densityRule: z
      .enum(["constant", "gardner"])
      .default("constant")
      .describe('Density: "constant" densityKgPerM3 everywhere, or "gardner" ρ = 310·Vp^0.25 kg/m³ (Gardner, Gardner & Gregory 1974)'),
    /** @default 1800 */
    densityKgPerM3: z.number().positive().default(1800).describe("Density when densityRule is constant, kg/m³"),
    /** @default 50 */
    minVsMps: z.number().positive().default(50).describe("Lowest Vs the inversion may reach, m/s"),
    /** @default 2000 */
    maxVsMps: z.number().positive().default(2000).describe("Highest Vs the inversion may reach, m/s"),
    /** @default 30 */
    maxIterations: z.number().int().min(1).max(500).default(30).describe("Largest number of damped least-squares steps (count)"),
    /** @default 0.5 */
    investigationFraction: z
      .number()
      .min(0.2)
      .max(1)
      .default(0.5)
      .describe("Depth of investigation as a fraction of the longest wavelength picked (common practice: a third to a half) (no unit)"),
    /** @default 5 */
    dampingMps: z
      .number()
      .min(0)
      .default(5)
      .describe(
        "Damping towards the starting model, m/s per unit of log parameter: a 10 % change of a layer's Vs costs as much as a 0.1·dampingMps residual on one pick, so layers the curve does not constrain stay near the start (0: none)",
      ),
    /** @default 5 */
    minPicks: z.number().int().min(2).default(5).describe("Windows with fewer picks are left out (count)"),
    maxMisfitPercent: z
      .number()
      .positive()
      .default(10)
      .describe(
        "Windows whose rms misfit after the inversion exceeds this share of their mean picked phase velocity are left out: no layered ground explains their curve (ground changing within the window, a higher mode or noise picked), %",
      ),
  })
  .superRefine((p, ctx) => {
    if (p.maxVsMps <= p.minVsMps) ctx.addIssue({ code: "custom", path: ["maxVsMps"], message: `maxVsMps (${p.maxVsMps} m/s) must exceed minVsMps (${p.minVsMps} m/s)` });
  });

export type SurfaceWaveProfileParams = z.output<typeof surfaceWaveProfileParams>;

/** Layer thicknesses growing by half from layer to layer, summing to `depthM`. */
export function growingThicknesses(count: number, depthM: number): number[] {
  let sum = 0;
  const w: number[] = [];
  for (let i = 0; i < count; i++) {
    w.push(1.5 ** i);
    sum += 1.5 ** i;
  }
  return w.map((x) => (x / sum) * depthM);
}

/** The curve a window's inversion uses: its hand pick of mode 0, else the automatic one. */
export function curveToInvert(picks: DispersionCurve[]): DispersionCurve | undefined {
  return picks.find((c) => c.mode === 0 && c.origin === "hand") ?? picks.find((c) => c.mode === 0 && c.origin === "automatic");
}

export const surfaceWaveProfileStep = defineStep({
  id: "surface-wave-profile",
  version: 2,
  title: "Surface-wave Vs profiles",
  description:
    "Inverts each window's fundamental-mode Rayleigh dispersion curve for a layered Vs profile by damped least squares (Levenberg–Marquardt, finite-difference Jacobian) over phase velocities computed by propagating the half-space's decaying solutions through the layers with orthonormalisation (compound-matrix idea of Dunkin 1965). " +
    "Vp by a Poisson's ratio, density constant or by Gardner's rule. Reports the rms misfit and the depth of investigation (a fraction, a third to a half, of the longest wavelength picked: common practice).",
  reads: ["dispersion"],
  writes: ["velocityProfiles", "dispersion"],
  params: surfaceWaveProfileParams,
  async run(input, p, ctx) {
    const disp = input.dispersion as DispersionSet;
    const density: DensityRule = p.densityRule === "gardner" ? { rule: "gardner" } : { rule: "constant", kgPerM3: p.densityKgPerM3 };
    const out: VelocityProfileSet = {
      kind: "velocity-profiles",
      vpRule: `Poisson's ratio ${p.poissonRatio}`,
      densityRule: p.densityRule === "gardner" ? "Gardner, Gardner & Gregory 1974: ρ = 310·Vp^0.25 kg/m³" : `constant ${p.densityKgPerM3} kg/m³`,
      profiles: [],
    };
    const windows = disp.windows.map((w) => ({ ...w }));
    const skipped: Array<{ window: string; reason: string }> = [];
    // The windows to invert, each with its curve and settings.
    const jobs: Array<{ index: number; curve: DispersionCurve; options: CurveInversionOptions }> = [];
    windows.forEach((w, index) => {
      const curve = curveToInvert(w.picks);
      if (!curve || curve.frequenciesHz.length < p.minPicks) {
        const reason = `${curve ? curve.frequenciesHz.length : 0} picks of mode 0, fewer than minPicks ${p.minPicks}`;
        skipped.push({ window: w.id, reason });
        ctx.log.warn(`window ${w.id}: ${reason}; left out`);
        return;
      }
      let longest = 0;
      curve.frequenciesHz.forEach((f, k) => (longest = Math.max(longest, curve.velocitiesMps[k] / f)));
      const thicknessM = p.layerThicknessesM.length > 0 ? p.layerThicknessesM : growingThicknesses(p.layerCount, p.investigationFraction * longest);
      jobs.push({
        index,
        curve,
        options: {
          thicknessM,
          freeThickness: p.freeThickness,
          poissonRatio: p.poissonRatio,
          density,
          minVsMps: p.minVsMps,
          maxVsMps: p.maxVsMps,
          maxIterations: p.maxIterations,
          investigationFraction: p.investigationFraction,
          dampingMps: p.dampingMps,
        },
      });
    });
    // Several windows and a pool of two or more workers: one window per task, in parallel.
    const pool = ctx.pool as WorkerPool | undefined;
    const remote = pool !== undefined && pool.size >= 2 && jobs.length >= 2;
    let done = 0;
    const results = await Promise.all(
      jobs.map(async (job) => {
        throwIfAborted(ctx.signal);
        const id = windows[job.index].id;
        try {
          const res = remote
            ? await pool.run(
                "invertDispersionCurveTask",
                { frequenciesHz: Float64Array.from(job.curve.frequenciesHz), velocitiesMps: Float64Array.from(job.curve.velocitiesMps), options: job.options },
                { signal: ctx.signal },
              )
            : invertDispersionCurve(job.curve.frequenciesHz, job.curve.velocitiesMps, job.options);
          ctx.progress(++done / jobs.length, id);
          return res;
        } catch (err) {
          const message = err instanceof Error ? err.message : String(err);
          if (err instanceof RangeError || (err instanceof Error && err.name === "RangeError")) throw new StepInputError(`window ${id}: ${message}`, "dispersion");
          throw err;
        }
      }),
    );
    for (let q = 0; q < jobs.length; q++) {
      const { index, curve } = jobs[q];
      const w = windows[index];
      const res = results[q];
      const modelled: DispersionCurve = { mode: 0, origin: "modelled", frequenciesHz: Float64Array.from(curve.frequenciesHz), velocitiesMps: res.modelledMps };
      w.modelled = modelled;
      const profile: VelocityProfile = {
        windowId: w.id,
        centreX: w.centreX,
        thicknessM: res.model.thicknessM,
        vs: res.model.vs,
        vp: res.model.vp,
        rho: res.model.rho,
        observed: curve,
        modelled,
        rmsMisfitMps: res.rmsMisfitMps,
        misfitHistoryMps: res.misfitHistoryMps,
        iterations: res.iterations,
        converged: res.converged,
        longestWavelengthM: res.longestWavelengthM,
        depthOfInvestigationM: res.depthOfInvestigationM,
      };
      const meanPicked = curve.velocitiesMps.reduce((a, v) => a + v, 0) / curve.velocitiesMps.length;
      const misfitPercent = (100 * res.rmsMisfitMps) / meanPicked;
      if (misfitPercent > p.maxMisfitPercent) {
        const reason = `rms misfit ${res.rmsMisfitMps.toFixed(1)} m/s is ${misfitPercent.toFixed(0)} % of the mean picked velocity ${meanPicked.toFixed(0)} m/s, above maxMisfitPercent ${p.maxMisfitPercent} %`;
        skipped.push({ window: w.id, reason });
        ctx.log.warn(`window ${w.id} at ${w.centreX.toFixed(1)} m: ${reason}; left out (check its picks on the dispersion image, or pick it by hand)`);
        continue;
      }
      out.profiles.push(profile);
      ctx.log.info(`window ${w.id} at ${w.centreX.toFixed(1)} m: rms misfit ${res.rmsMisfitMps.toFixed(2)} m/s after ${res.iterations} steps; depth of investigation ${res.depthOfInvestigationM.toFixed(1)} m`);
    }
    if (out.profiles.length === 0) {
      throw new StepInputError(
        skipped.length > 0 && jobs.length > 0
          ? `no window gave a profile: ${skipped.map((k) => `${k.window} (${k.reason})`).join("; ")}. Pick the curves by hand, widen the pick bounds of dispersion-image or raise maxMisfitPercent`
          : `no window has ${p.minPicks} or more picks of the fundamental mode: pick by hand or widen the pick bounds of dispersion-image`,
        jobs.length > 0 ? "maxMisfitPercent" : "minPicks",
      );
    }
    const tops = (pr: VelocityProfile) => {
      const z: number[] = [0];
      for (let k = 0; k < pr.thicknessM.length - 1; k++) z.push(z[k] + pr.thicknessM[k]);
      return z;
    };
    return {
      outputs: { velocityProfiles: out, dispersion: { ...disp, windows } },
      summary: {
        profiles: out.profiles.length,
        skipped,
        rmsMisfitMps: out.profiles.map((pr) => +pr.rmsMisfitMps.toFixed(3)),
        depthOfInvestigationM: out.profiles.map((pr) => +pr.depthOfInvestigationM.toFixed(2)),
        vpRule: out.vpRule,
        densityRule: out.densityRule,
      },
      series: [
        {
          name: "vs-profiles",
          xLabel: "Vs, m/s",
          yLabel: "depth, m",
          points: out.profiles.flatMap((pr) => {
            const z = tops(pr);
            return Array.from(pr.vs).flatMap((v, k) => {
              const bottom = k < pr.vs.length - 1 ? z[k + 1] : Math.max(pr.depthOfInvestigationM, z[k]);
              return [{ x: v, y: z[k], group: pr.windowId }, { x: v, y: bottom, group: pr.windowId }];
            });
          }),
        },
        {
          name: "profile-fit",
          xLabel: "position along the line, m",
          yLabel: "rms misfit, m/s",
          points: out.profiles.map((pr) => ({ x: pr.centreX, y: pr.rmsMisfitMps })),
        },
      ],
    };
  },
});

export default surfaceWaveProfileStep;
