/**
 * Step "first-arrival-tomography": Vp (or Vs from SH picks) near the surface from first-arrival
 * picks by travel-time tomography: eikonal times by fast sweeping (Zhao 2005) on the factored
 * equation (Fomel, Luo & Zhao 2009), rays by steepest descent on the times, and a regularised
 * Gauss–Newton update (second-difference smoothing and damping) solved by LSQR (Paige & Saunders
 * 1982), with the pick uncertainties as data weights and the rays re-traced every iteration.
 * Writes the tomogram: velocity, ray coverage per cell, the depth the rays reach per column,
 * observed and modelled times per pick and the residual per iteration.
 */
import { z } from "zod";
import { defineStep, StepInputError, throwIfAborted } from "../step";
import type { ElasticModel, GatherSet, PickSet, Tomogram } from "../types";
import { interpolateNodes, type TravelTimeGrid } from "../kernels/traveltime/eikonal";
import { rayReachDepth, travelTimeTomography, type TravelTimeData } from "../kernels/traveltime/tomography";

export const firstArrivalTomographyParams = z
  .object({
    /** @default "p" */
    wave: z.enum(["p", "s"]).default("p").describe('"p": the picks are P first arrivals (vertical source), the result is Vp; "s": SH first arrivals (horizontal shear source), the result is Vs'),
    /** @default false */
    keepFlaggedPicks: z.boolean().default(false).describe("Use the picks the picker flagged off the offset-time trend (normally left out)"),
    /** @default true */
    useInputModel: z.boolean().default(true).describe("When a model is present, start from its Vp (or Vs) on its grid instead of the gradient below"),
    /** @default null */
    spacingM: z
      .number()
      .positive()
      .nullable()
      .default(null)
      .describe("Grid spacing, m (null: the input model's spacing, or 0.5 m without one)"),
    /** @default 15 */
    depthM: z.number().positive().default(15).describe("Depth of the grid below the surface when it is not taken from the model, m"),
    /** @default 2 */
    marginM: z.number().min(0).default(2).describe("Grid margin beyond the outermost source or receiver when the grid is not taken from the model, m"),
    /** @default 400 */
    startingVelocityMps: z.number().positive().default(400).describe("Starting velocity at the surface, m/s (without an input model)"),
    /** @default 20 */
    gradientPerM: z.number().default(20).describe("Increase of the starting velocity with depth, (m/s)/m (without an input model)"),
    /** @default 2 */
    smoothingM: z.number().min(0).default(2).describe("Smoothing length, m: weight (smoothingM / spacing)² on the second differences of the departure from the starting model"),
    /** @default 10 */
    damping: z.number().min(0).default(10).describe("Damping of each update of the relative slowness (dimensionless; larger keeps each step closer to the current model)"),
    /** @default 8 */
    iterations: z.number().int().min(1).max(30).default(8).describe("Outer iterations (rays re-traced each time)"),
    /** @default 1 */
    pickUncertaintyMs: z.number().positive().default(1).describe("Uncertainty (one standard deviation) of a pick of quality 1, ms"),
    /** @default true */
    uncertaintyFromQuality: z
      .boolean()
      .default(true)
      .describe("Scale each pick's uncertainty by (2 − quality): a quality-0 pick counts as twice as uncertain"),
    /** @default 100 */
    minVelocityMps: z.number().positive().default(100).describe("Lowest velocity the update may reach, m/s"),
    /** @default 5000 */
    maxVelocityMps: z.number().positive().default(5000).describe("Highest velocity the update may reach, m/s"),
    /** @default null */
    coverageThresholdM: z
      .number()
      .positive()
      .nullable()
      .default(null)
      .describe("Ray length per cell above which a cell counts as covered (for the depth the rays reach), m (null: 2 × spacing)"),
  })
  .superRefine((p, ctx) => {
    if (p.maxVelocityMps <= p.minVelocityMps) {
      ctx.addIssue({ code: "custom", path: ["maxVelocityMps"], message: `maxVelocityMps (${p.maxVelocityMps}) must be above minVelocityMps (${p.minVelocityMps})` });
    }
    if (p.startingVelocityMps < p.minVelocityMps || p.startingVelocityMps > p.maxVelocityMps) {
      ctx.addIssue({ code: "custom", path: ["startingVelocityMps"], message: `startingVelocityMps (${p.startingVelocityMps}) must lie between minVelocityMps (${p.minVelocityMps}) and maxVelocityMps (${p.maxVelocityMps})` });
    }
  });

export type FirstArrivalTomographyParams = z.output<typeof firstArrivalTomographyParams>;

interface PickGeometry {
  gatherId: string;
  traceIndex: number;
  sourceX: number;
  sourceZ: number;
  receiverX: number;
  receiverZ: number;
  timeS: number;
  sigmaS: number;
  flagged: boolean;
}

/** The picks to use, with positions from the gathers' headers. */
function pickGeometry(picks: PickSet, gathers: GatherSet, p: FirstArrivalTomographyParams): { used: PickGeometry[]; leftOut: number } {
  const byId = new Map(gathers.gathers.map((g) => [g.id, g]));
  const used: PickGeometry[] = [];
  let leftOut = 0;
  picks.picks.forEach((pk, i) => {
    const g = byId.get(pk.gatherId);
    if (!g) throw new StepInputError(`picks[${i}] refers to gather "${pk.gatherId}", which is not among the gathers (${[...byId.keys()].slice(0, 5).join(", ")}${byId.size > 5 ? ", …" : ""})`, "picks");
    const h = g.traces[pk.traceIndex];
    if (!h) throw new StepInputError(`picks[${i}] refers to trace ${pk.traceIndex} of gather "${pk.gatherId}", which has ${g.traces.length} traces`, "picks");
    if ((pk.flagged && !p.keepFlaggedPicks) || h.dead || !Number.isFinite(pk.timeS)) {
      leftOut++;
      return;
    }
    for (const [name, v] of [["sourceX", h.sourceX], ["receiverX", h.receiverX], ["sourceZ", h.sourceZ], ["receiverZ", h.receiverZ]] as const) {
      if (!Number.isFinite(v)) throw new StepInputError(`trace ${pk.traceIndex} of gather "${pk.gatherId}" has no ${name}: run the geometry step before the tomography`, "gathers");
    }
    if (h.sourceX === h.receiverX && h.sourceZ === h.receiverZ) {
      leftOut++;
      return;
    }
    const quality = Math.min(Math.max(pk.quality, 0), 1);
    const sigmaS = (p.pickUncertaintyMs / 1000) * (p.uncertaintyFromQuality ? 2 - quality : 1);
    used.push({ gatherId: pk.gatherId, traceIndex: pk.traceIndex, sourceX: h.sourceX, sourceZ: h.sourceZ, receiverX: h.receiverX, receiverZ: h.receiverZ, timeS: pk.timeS, sigmaS, flagged: pk.flagged });
  });
  return { used, leftOut };
}

/** Grid and starting velocity (nodes `[z][x]`), from the model or from the settings and the spread. */
function startingGrid(
  used: PickGeometry[],
  model: ElasticModel | undefined,
  p: FirstArrivalTomographyParams,
): { grid: TravelTimeGrid; originX: number; originZ: number; start: Float64Array; fromModel: boolean } {
  if (model && p.useInputModel) {
    const source = p.wave === "p" ? model.vp : model.vs;
    const h = p.spacingM ?? model.spacingM;
    const widthM = (model.nx - 1) * model.spacingM;
    const depthM = (model.nz - 1) * model.spacingM;
    const nx = Math.floor(widthM / h + 1e-9) + 1;
    const nz = Math.floor(depthM / h + 1e-9) + 1;
    if (nx < 2 || nz < 2) throw new StepInputError(`spacingM ${h} m is coarser than the model (${widthM} × ${depthM} m)`, "spacingM");
    const modelGrid: TravelTimeGrid = { nx: model.nx, nz: model.nz, spacingM: model.spacingM };
    const start = new Float64Array(nx * nz);
    for (let iz = 0; iz < nz; iz++) {
      for (let ix = 0; ix < nx; ix++) start[iz * nx + ix] = interpolateNodes(source, modelGrid, ix * h, iz * h);
    }
    for (let k = 0; k < start.length; k++) {
      if (!(start[k] > 0)) throw new StepInputError(`the input model's ${p.wave === "p" ? "Vp" : "Vs"} is not positive everywhere (${start[k]} m/s)`, "model");
    }
    return { grid: { nx, nz, spacingM: h }, originX: model.originX, originZ: model.originZ, start, fromModel: true };
  }
  const h = p.spacingM ?? 0.5;
  let lo = Infinity;
  let hi = -Infinity;
  for (const u of used) {
    lo = Math.min(lo, u.sourceX, u.receiverX);
    hi = Math.max(hi, u.sourceX, u.receiverX);
  }
  const originX = lo - p.marginM;
  const nx = Math.ceil((hi + p.marginM - originX) / h - 1e-9) + 1;
  const nz = Math.floor(p.depthM / h + 1e-9) + 1;
  if (nz < 2) throw new StepInputError(`depthM (${p.depthM} m) must span at least one cell of ${h} m`, "depthM");
  const start = new Float64Array(nx * nz);
  for (let iz = 0; iz < nz; iz++) {
    const v = p.startingVelocityMps + p.gradientPerM * iz * h;
    if (!(v > 0)) throw new StepInputError(`the starting velocity falls to ${v} m/s at ${iz * h} m depth: raise startingVelocityMps or gradientPerM`, "gradientPerM");
    start.fill(v, iz * nx, (iz + 1) * nx);
  }
  return { grid: { nx, nz, spacingM: h }, originX, originZ: 0, start, fromModel: false };
}

/**
 * Rays for drawing: every fourth point of the descent (its steps are a quarter cell, so about one
 * point per cell) plus each ray's last point, moved to profile coordinates.
 */
function decimateRays(points: Float64Array, starts: Int32Array, originX: number, originZ: number): { rayPoints: Float32Array; rayStart: Int32Array } {
  const rays = starts.length - 1;
  const rayStart = new Int32Array(rays + 1);
  const kept: number[] = [];
  for (let r = 0; r < rays; r++) {
    rayStart[r] = kept.length / 2;
    const first = starts[r];
    const last = starts[r + 1] - 1;
    for (let p = first; p <= last; p++) {
      if ((p - first) % 4 === 0 || p === last) kept.push(points[2 * p] + originX, points[2 * p + 1] + originZ);
    }
  }
  rayStart[rays] = kept.length / 2;
  return { rayPoints: Float32Array.from(kept), rayStart };
}

export const firstArrivalTomographyStep = defineStep({
  id: "first-arrival-tomography",
  version: 1,
  title: "First-arrival travel-time tomography",
  description:
    "Inverts first-arrival picks for Vp (or Vs from SH picks) near the surface: eikonal travel times by fast sweeping (Zhao 2005) on the factored " +
    "equation (Fomel, Luo & Zhao 2009), rays by steepest descent on the times, and a regularised Gauss–Newton update (second-difference smoothing, " +
    "damping, velocity bounds) solved by LSQR (Paige & Saunders 1982) with the pick uncertainties as weights, re-tracing the rays each iteration. " +
    "Starts from the input model or a velocity gradient. Flagged picks are left out unless asked. Writes the tomogram with ray coverage, the depth the " +
    "rays reach, observed and modelled times and the residual per iteration.",
  reads: ["picks", "gathers"],
  optionalReads: ["model"],
  writes: ["tomogram"],
  params: firstArrivalTomographyParams,
  async run(input, p, ctx) {
    const picks = input.picks as PickSet;
    const gathers = input.gathers as GatherSet;
    const { used, leftOut } = pickGeometry(picks, gathers, p);
    if (used.length < 3) {
      throw new StepInputError(`only ${used.length} usable picks (of ${picks.picks.length}; ${leftOut} flagged, dead or at zero offset): the tomography needs more`, "picks");
    }
    const { grid, originX, originZ, start, fromModel } = startingGrid(used, input.model, p);
    const h = grid.spacingM;
    const xMax = (grid.nx - 1) * h;
    const zMax = (grid.nz - 1) * h;
    // Positions relative to the grid; a position within half a cell outside is moved onto the edge.
    const onGrid = (value: number, lo: number, hi: number, what: string, u: PickGeometry) => {
      const rel = value - lo;
      if (rel < -h / 2 || rel > hi + h / 2) {
        throw new StepInputError(
          `${what} ${value} m of trace ${u.traceIndex} in gather "${u.gatherId}" lies outside the ${fromModel ? "model's" : "tomography"} grid (${lo} … ${lo + hi} m)`,
          fromModel ? "model" : "picks",
        );
      }
      return Math.min(Math.max(rel, 0), hi);
    };
    const sourceKeys = new Map<string, number>();
    const sources: number[] = [];
    const n = used.length;
    const data: TravelTimeData = {
      sources: new Float64Array(0),
      pickSource: new Int32Array(n),
      receiverX: new Float64Array(n),
      receiverZ: new Float64Array(n),
      timeS: new Float64Array(n),
      sigmaS: new Float64Array(n),
    };
    used.forEach((u, i) => {
      const sx = onGrid(u.sourceX, originX, xMax, "source x", u);
      const sz = onGrid(u.sourceZ, originZ, zMax, "source depth", u);
      const key = `${sx.toFixed(4)},${sz.toFixed(4)}`;
      let src = sourceKeys.get(key);
      if (src === undefined) {
        src = sources.length / 2;
        sourceKeys.set(key, src);
        sources.push(sx, sz);
      }
      data.pickSource[i] = src;
      data.receiverX[i] = onGrid(u.receiverX, originX, xMax, "receiver x", u);
      data.receiverZ[i] = onGrid(u.receiverZ, originZ, zMax, "receiver depth", u);
      data.timeS[i] = u.timeS;
      data.sigmaS[i] = u.sigmaS;
    });
    data.sources = Float64Array.from(sources);
    ctx.log.info({ picks: n, leftOut, sources: sources.length / 2, nx: grid.nx, nz: grid.nz, spacingM: h, fromModel }, `tomography of ${n} picks from ${sources.length / 2} source positions on ${grid.nx} × ${grid.nz} nodes of ${h} m`);

    const result = travelTimeTomography(grid, data, start, {
      iterations: p.iterations,
      smoothingM: p.smoothingM,
      damping: p.damping,
      minVelocity: p.minVelocityMps,
      maxVelocity: p.maxVelocityMps,
      onIteration: (it, rms) => {
        throwIfAborted(ctx.signal);
        ctx.progress(Math.min(1, (it + 1) / (p.iterations + 2)), `iteration ${it}: rms ${(rms * 1000).toFixed(3)} ms`);
      },
    });
    const threshold = p.coverageThresholdM ?? 2 * h;
    const reach = rayReachDepth(result.coverageM, grid, threshold);
    const tomogram: Tomogram = {
      kind: "tomogram",
      wave: p.wave,
      nx: grid.nx,
      nz: grid.nz,
      spacingM: h,
      originX,
      originZ,
      velocity: Float32Array.from(result.velocity),
      startingVelocity: Float32Array.from(start),
      coverageM: Float32Array.from(result.coverageM),
      rayCount: result.rayCount,
      coverageThresholdM: threshold,
      reachDepthM: Float32Array.from(reach, (d) => d + originZ),
      ...decimateRays(result.rayPoints, result.rayStart, originX, originZ),
      picks: used.map((u, i) => ({
        gatherId: u.gatherId,
        traceIndex: u.traceIndex,
        sourceX: u.sourceX,
        receiverX: u.receiverX,
        observedS: u.timeS,
        startingModelledS: result.startingModelledS[i],
        modelledS: result.modelledS[i],
        uncertaintyS: u.sigmaS,
        flagged: u.flagged,
      })),
      iterations: result.history.map((r) => ({ iteration: r.iteration, rmsS: r.rmsS, weightedRms: r.weightedRms })),
    };
    const first = result.history[0];
    const last = result.history[result.history.length - 1];
    const covered = result.coverageM.reduce((c, v) => c + (v >= threshold ? 1 : 0), 0);
    const reached = Array.from(reach).filter((d) => d === d);
    const maxReachM = reached.length > 0 ? Math.max(...reached) + originZ : null;
    if (result.unreachedRays > 0) ctx.log.warn({ unreachedRays: result.unreachedRays }, `${result.unreachedRays} rays did not reach their source by steepest descent`);
    ctx.log.info(
      { startRmsMs: first.rmsS * 1000, finalRmsMs: last.rmsS * 1000, coveredCells: covered, maxReachM },
      `rms ${(first.rmsS * 1000).toFixed(3)} → ${(last.rmsS * 1000).toFixed(3)} ms; ${covered} of ${grid.nx * grid.nz} cells covered; rays reach ${maxReachM === null ? "no depth" : `${maxReachM.toFixed(1)} m`}`,
    );
    ctx.progress(1, `rms ${(last.rmsS * 1000).toFixed(3)} ms`);
    const offsetOf = (i: number) => used[i].receiverX - used[i].sourceX;
    return {
      outputs: { tomogram },
      summary: {
        wave: p.wave,
        picks: n,
        leftOut,
        sources: sources.length / 2,
        nx: grid.nx,
        nz: grid.nz,
        spacingM: h,
        startingModel: fromModel ? "input model" : "gradient",
        startRmsMs: first.rmsS * 1000,
        finalRmsMs: last.rmsS * 1000,
        finalWeightedRms: last.weightedRms,
        coveredCells: covered,
        maxReachM,
        unreachedRays: result.unreachedRays,
      },
      series: [
        { name: "travel-time-rms", xLabel: "iteration", yLabel: "rms residual (ms)", points: result.history.map((r) => ({ x: r.iteration, y: r.rmsS * 1000 })) },
        {
          name: "travel-times",
          xLabel: "offset (m)",
          yLabel: "first-arrival time (ms)",
          points: [
            ...used.map((u, i) => ({ x: offsetOf(i), y: u.timeS * 1000, group: `observed ${u.gatherId}` })),
            ...used.map((u, i) => ({ x: offsetOf(i), y: result.modelledS[i] * 1000, group: `modelled ${u.gatherId}` })),
          ],
        },
        { name: "ray-reach-depth", xLabel: "x (m)", yLabel: "depth reached by rays (m)", points: reached.length === 0 ? [] : Array.from(reach).flatMap((d, ix) => (d === d ? [{ x: originX + ix * h, y: d + originZ }] : [])) },
      ],
    };
  },
});

export default firstArrivalTomographyStep;
