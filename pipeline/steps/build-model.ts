/**
 * Step "build-model": an elastic model grid (Vp, Vs, density) from a description in the pipeline
 * file: layers with vertical gradients, then shapes with their own properties (rectangles,
 * ellipses, polygons: a backfilled trench, a void, a boulder), or a CSV grid given inline
 * (`csvGrid`, columns x, z, vp, vs, rho; files are read by the CLI with modelFromCsv) with shapes
 * drawn on top, or (`from`) the 1D Vs profiles of surface-wave-profile interpolated along the line.
 * Cells are checked before the model is written: Vs > 0, Vp/Vs > √2, density > 0.
 */
import { z } from "zod";
import { checkModelFootprint } from "../model-limits";
import { defineStep, StepInputError } from "../step";
import type { ElasticModel, GatherSet, VelocityProfileSet } from "../types";
import { checkModelCells } from "../kernels/fd/checks";
import { FdSetupError } from "../kernels/fd/errors";
import { buildModel, countShapeCells, modelFromCsv, paintShapes, shapeBounds, type GridDescription, type ShapeDescription } from "../kernels/fd/model-grid";
import { AppError } from "../errors";
import { profilesToModel } from "../kernels/dispersion/profile-section";
import { blendTomogram } from "../kernels/traveltime/blend";

const velocity = (what: string) => z.number().describe(`${what}, m/s`);
const density = z.number().describe("Density, kg/m³");

const properties = {
  vp: velocity("P velocity").optional(),
  vs: velocity("S velocity").optional(),
  rho: density.optional(),
};

const layerSchema = z.object({
  topM: z.number().describe("Depth of the layer top, m (positive down)"),
  vp: velocity("P velocity at the layer top"),
  vs: velocity("S velocity at the layer top"),
  rho: density,
  vpGradient: z.number().default(0).describe("Increase of Vp with depth below the layer top, (m/s)/m"),
  vsGradient: z.number().default(0).describe("Increase of Vs with depth below the layer top, (m/s)/m"),
  rhoGradient: z.number().default(0).describe("Increase of density with depth below the layer top, (kg/m³)/m"),
});

const shapeSchema = z.discriminatedUnion("kind", [
  z.object({
    kind: z.literal("rectangle"),
    x0M: z.number().describe("Left edge, m"),
    x1M: z.number().describe("Right edge, m"),
    z0M: z.number().describe("Top, m"),
    z1M: z.number().describe("Bottom, m"),
    ...properties,
  }),
  z.object({
    kind: z.literal("ellipse"),
    centerXM: z.number().describe("Centre x, m"),
    centerZM: z.number().describe("Centre depth, m"),
    radiusXM: z.number().positive().describe("Horizontal semi-axis, m"),
    radiusZM: z.number().positive().describe("Vertical semi-axis, m"),
    ...properties,
  }),
  z.object({
    kind: z.literal("polygon"),
    points: z.array(z.tuple([z.number(), z.number()])).min(3).describe("Corners [x, z], m, in order"),
    ...properties,
  }),
]);

export const buildModelParams = z
  .object({
    grid: z
      .object({
        originXM: z.number().default(0).describe("x of the first grid column, m"),
        originZM: z.number().default(0).describe("Depth of the first grid row, m (0 = the free surface)"),
        spacingM: z.number().positive().default(0.25).describe("Grid spacing in x and z, m"),
        widthM: z.number().positive().optional().describe("Width of the grid, m (or give nx)"),
        depthM: z.number().positive().optional().describe("Depth extent of the grid, m (or give nz)"),
        nx: z.number().int().min(8).optional().describe("Number of grid columns (instead of widthM)"),
        nz: z.number().int().min(8).optional().describe("Number of grid rows (instead of depthM)"),
        fromSpread: z
          .boolean()
          .default(false)
          .describe("Size the grid in x from the gathers' source and receiver positions plus spreadMarginM on each side"),
        spreadMarginM: z.number().min(0).default(5).describe("Margin beyond the outermost source or receiver when fromSpread is on, m"),
      })
      .default({ originXM: 0, originZM: 0, spacingM: 0.25, fromSpread: false, spreadMarginM: 5, widthM: 50, depthM: 20 })
      .describe("Grid geometry"),
    layers: z
      .array(layerSchema)
      .default([{ topM: 0, vp: 600, vs: 200, rho: 1800, vpGradient: 0, vsGradient: 0, rhoGradient: 0 }])
      .describe("Layers from the top down, each from its top to the next layer's top"),
    shapes: z.array(shapeSchema).default([]).describe("Bodies drawn over the layers in order (later ones on top)"),
    csvGrid: z
      .string()
      .optional()
      .describe("Inline CSV grid with header x,z,vp,vs,rho (m, m/s, kg/m³) used instead of grid and layers; shapes are drawn on top"),
    /**
     * Where the background comes from. Optional rather than defaulted so that the cache keys of
     * pipelines written before it existed stay as they were.
     * @default "layers"
     */
    from: z
      .enum(["layers", "velocity-profiles", "velocity-profiles-over-layers"])
      .optional()
      .describe(
        'Background of the grid (default "layers"): "layers" the typed layers; "velocity-profiles" the 1D Vs profiles of surface-wave-profile interpolated along the line, each continued below its depth of investigation from its value there; "velocity-profiles-over-layers" the profiles down to their depth of investigation and the typed layers below. Shapes are drawn on top in every case',
      ),
    /**
     * Blend the first-arrival tomogram over the background down to the depth its rays reach.
     * Optional so that earlier pipelines keep their cache keys. @default false
     */
    tomogramAbove: z
      .boolean()
      .optional()
      .describe(
        "Take Vp (or Vs, for an SH tomogram) from the first-arrival tomogram down to the depth its rays reach in each column, fading over the last metre; Vp is then kept at least 1.5 Vs (default false)",
      ),
  })
  .superRefine((p, ctx) => {
    const issue = (path: (string | number)[], message: string) => ctx.addIssue({ code: "custom", path, message });
    const g = p.grid;
    if (p.csvGrid && p.from !== undefined && p.from !== "layers") issue(["from"], `from "${p.from}" cannot be combined with csvGrid`);
    if (!p.csvGrid) {
      if (g.widthM === undefined && g.nx === undefined && !g.fromSpread) issue(["grid", "widthM"], "give grid.widthM, grid.nx or grid.fromSpread");
      if (g.depthM === undefined && g.nz === undefined) issue(["grid", "depthM"], "give grid.depthM or grid.nz");
      if (p.layers.length === 0) issue(["layers"], "give at least one layer");
    }
    const depth = g.nz !== undefined ? (g.nz - 1) * g.spacingM : (g.depthM ?? 0);
    const bottom = g.originZM + depth;
    p.layers.forEach((L, i) => {
      if (i === 0 && L.topM > g.originZM && !p.csvGrid) issue(["layers", 0, "topM"], `the first layer must start at or above the grid top (${g.originZM} m), got ${L.topM} m`);
      if (i > 0 && L.topM <= p.layers[i - 1].topM) issue(["layers", i, "topM"], `layer tops must increase downwards: ${L.topM} m is not below ${p.layers[i - 1].topM} m`);
      const layerBottom = Math.max(L.topM, i + 1 < p.layers.length ? p.layers[i + 1].topM : bottom);
      for (const [name, top, grad] of [["vp", L.vp, L.vpGradient], ["vs", L.vs, L.vsGradient], ["rho", L.rho, L.rhoGradient]] as const) {
        const atBottom = top + grad * (layerBottom - L.topM);
        if (!(top > 0)) issue(["layers", i, name], `${name} must be > 0, got ${top}`);
        else if (!(atBottom > 0)) issue(["layers", i, `${name}Gradient`], `${name} falls to ${atBottom} at the layer bottom (${layerBottom} m); it must stay > 0`);
      }
      for (const dz of [0, layerBottom - L.topM]) {
        const vp = L.vp + L.vpGradient * dz;
        const vs = L.vs + L.vsGradient * dz;
        if (vs > 0 && vp > 0 && vp <= Math.SQRT2 * vs) {
          issue(["layers", i, "vp"], `Vp/Vs = ${(vp / vs).toFixed(3)} at ${L.topM + dz} m depth: Vp must exceed √2·Vs (${(Math.SQRT2 * vs).toFixed(1)} m/s)`);
          break;
        }
      }
    });
    p.shapes.forEach((s, i) => {
      for (const name of ["vp", "vs", "rho"] as const) {
        const v = s[name];
        if (v !== undefined && !(v > 0)) issue(["shapes", i, name], `${name} must be > 0, got ${v}`);
      }
      if (s.vp !== undefined && s.vs !== undefined && s.vs > 0 && s.vp <= Math.SQRT2 * s.vs) {
        issue(["shapes", i, "vp"], `Vp/Vs = ${(s.vp / s.vs).toFixed(3)}: Vp must exceed √2·Vs (${(Math.SQRT2 * s.vs).toFixed(1)} m/s)`);
      }
      if (s.vp === undefined && s.vs === undefined && s.rho === undefined) issue(["shapes", i, "kind"], "a shape needs at least one of vp, vs, rho");
      // Outside the grid, where the grid is known from the settings alone.
      const b = shapeBounds(s as ShapeDescription);
      const width = g.nx !== undefined ? (g.nx - 1) * g.spacingM : g.widthM;
      const xOut = !p.csvGrid && !g.fromSpread && width !== undefined && (b.xMax < g.originXM || b.xMin > g.originXM + width);
      const zOut = !p.csvGrid && depth > 0 && (b.zMax < g.originZM || b.zMin > bottom);
      if (xOut || zOut) {
        issue(["shapes", i], `${s.kind} (x ${b.xMin} to ${b.xMax} m, z ${b.zMin} to ${b.zMax} m) lies outside the grid (x ${g.originXM} to ${g.originXM + (width ?? 0)} m, z ${g.originZM} to ${bottom} m)`);
      }
    });
  });

export type BuildModelParams = z.output<typeof buildModelParams>;

/** Grid geometry from the settings (and the gathers' spread when asked). */
export function resolveGrid(p: BuildModelParams, gathers?: GatherSet): GridDescription {
  const g = p.grid;
  const h = g.spacingM;
  const count = (extent: number) => Math.floor(extent / h + 1e-9) + 1;
  let originX = g.originXM;
  let nx: number;
  if (g.fromSpread) {
    if (!gathers || gathers.gathers.length === 0) {
      throw new StepInputError("grid.fromSpread needs gathers with source and receiver positions before this step.", "grid.fromSpread");
    }
    let lo = Infinity;
    let hi = -Infinity;
    for (const ga of gathers.gathers) {
      for (const t of ga.traces) {
        for (const x of [t.sourceX, t.receiverX]) {
          if (Number.isFinite(x)) {
            lo = Math.min(lo, x);
            hi = Math.max(hi, x);
          }
        }
      }
    }
    if (!Number.isFinite(lo)) throw new StepInputError("the gathers carry no source or receiver positions: run the geometry step first.", "grid.fromSpread");
    originX = lo - g.spreadMarginM;
    nx = Math.ceil((hi + g.spreadMarginM - originX) / h - 1e-9) + 1;
  } else {
    nx = g.nx ?? count(g.widthM!);
  }
  const nz = g.nz ?? count(g.depthM!);
  return { originX, originZ: g.originZM, spacingM: h, nx, nz };
}

/** The background from the 1D profiles of surface-wave-profile (see profilesToModel). */
function modelFromProfiles(set: VelocityProfileSet | undefined, grid: GridDescription, below?: ElasticModel): ElasticModel {
  if (!set || set.profiles.length === 0) {
    throw new StepInputError('from "velocity-profiles" needs the 1D profiles of a surface-wave-profile step earlier in the pipeline.', "from");
  }
  return profilesToModel(
    set.profiles.map((pr) => ({ x: pr.centreX, thicknessM: pr.thicknessM, vp: pr.vp, vs: pr.vs, rho: pr.rho, depthOfInvestigationM: pr.depthOfInvestigationM })),
    grid,
    below,
  );
}

export const buildModelStep = defineStep({
  id: "build-model",
  version: 1,
  title: "Build model",
  description:
    "Builds an elastic model grid (Vp, Vs, density on a regular grid with origin and spacing) from layers with vertical gradients and shapes (rectangle, ellipse, polygon) with their own properties, or from an inline CSV grid (x, z, vp, vs, rho), or from the surface-wave 1D profiles along the line (optionally over the layers below their depth of investigation). Refuses cells with Vs ≤ 0, Vp/Vs ≤ √2 or density ≤ 0, naming the cell.",
  reads: [],
  optionalReads: ["gathers", "velocityProfiles", "tomogram"],
  writes: ["model"],
  params: buildModelParams,
  async run(input, p, ctx) {
    let model: ElasticModel;
    let grid: GridDescription;
    if (p.csvGrid) {
      try {
        model = modelFromCsv(p.csvGrid, "csvGrid");
      } catch (err) {
        if (err instanceof AppError) throw new StepInputError(err.message, "csvGrid");
        throw err;
      }
      grid = { originX: model.originX, originZ: model.originZ, spacingM: model.spacingM, nx: model.nx, nz: model.nz };
    } else {
      grid = resolveGrid(p, input.gathers);
      checkModelFootprint(
        { what: "the model grid", nx: grid.nx, nz: grid.nz, bytesPerWorker: grid.nx * grid.nz * 3 * 4, workers: 1, makeup: "Vp, Vs and density × cells × 4 bytes" },
        "grid.spacingM",
        `Use a coarser grid.spacingM (now ${p.grid.spacingM} m), a smaller grid.depthM or a narrower grid.`,
      );
      model = buildModel(grid, p.layers, []);
      if (p.from === "velocity-profiles" || p.from === "velocity-profiles-over-layers") {
        model = modelFromProfiles(input.velocityProfiles, grid, p.from === "velocity-profiles-over-layers" ? model : undefined);
      }
    }
    let tomogramCells = 0;
    if (p.tomogramAbove) {
      if (!input.tomogram) throw new StepInputError("tomogramAbove needs the tomogram of a first-arrival-tomography step earlier in the pipeline.", "tomogramAbove");
      const blended = blendTomogram(model, input.tomogram);
      const target = input.tomogram.wave === "p" ? model.vp : model.vs;
      target.set(blended.velocity);
      for (let k = 0; k < target.length; k++) if (blended.weight[k] > 0) tomogramCells++;
      // A smeared tomogram can come out slower than the shear model allows: keep λ > 0 with a
      // margin (Vp/Vs ≥ 1.5, Poisson's ratio 0.1).
      for (let k = 0; k < model.vp.length; k++) {
        if (model.vp[k] < 1.5 * model.vs[k]) model.vp[k] = 1.5 * model.vs[k];
      }
    }
    const shapes = p.shapes as ShapeDescription[];
    shapes.forEach((s, i) => {
      if (countShapeCells(grid, s) === 0) {
        const b = shapeBounds(s);
        throw new StepInputError(
          `shapes[${i}] (${s.kind}, x ${b.xMin} to ${b.xMax} m, z ${b.zMin} to ${b.zMax} m) covers no grid node of the grid ` +
            `x ${grid.originX} to ${grid.originX + (grid.nx - 1) * grid.spacingM} m, z ${grid.originZ} to ${grid.originZ + (grid.nz - 1) * grid.spacingM} m: move it inside or enlarge it.`,
          `shapes.${i}`,
        );
      }
    });
    if (shapes.length > 0) {
      model = paintShapes(model, shapes);
    }
    let extremes: ReturnType<typeof checkModelCells>;
    try {
      extremes = checkModelCells(model);
    } catch (err) {
      throw err instanceof FdSetupError ? new StepInputError(err.message, err.field) : err;
    }
    const { vpMax, vsMin, vsMax } = extremes;
    ctx.progress(1, `model ${model.nx} × ${model.nz}`);
    return {
      outputs: { model },
      summary: {
        // The origin is the model's own: with fromSpread or a CSV grid, the grid settings' originXM
        // (and originZM for a CSV grid) are not used, and the summary says where the grid came from.
        gridFrom: p.csvGrid ? "csv grid" : p.grid.fromSpread ? `spread of the gathers ± ${p.grid.spreadMarginM} m` : "grid settings",
        nx: model.nx, nz: model.nz, spacingM: model.spacingM, originXM: model.originX, originZM: model.originZ,
        vpMax, vsMin, vsMax, shapes: shapes.length,
        ...(p.from ? { from: p.from } : {}),
        ...(p.tomogramAbove ? { tomogramCells } : {}),
      },
    };
  },
});
