/**
 * Step "forward-model": synthetic gathers for every shot through the model by the 2D elastic
 * finite-difference solver (velocity-stress staggered grid, Virieux 1986; fourth order in space,
 * Levander 1988; free surface by stress imaging; convolutional PML, Komatitsch & Martin 2007),
 * in the layout of the field gathers (same traces, sample interval, length and start time), or for
 * a spread described in the settings (pure modelling studies). Shots run in parallel on the
 * worker pool; optional wavefield snapshots of one shot.
 */
import { z } from "zod";
import { checkModelFootprint, MODEL_TOO_LARGE_REMEDY, solverFootprint } from "../model-limits";
import { defineStep, StepInputError, throwIfAborted } from "../step";
import type { Gather, GatherSet, TraceHeader } from "../types";
import { FdSetupError } from "../kernels/fd/errors";
import { modelShots, type GatherTemplate } from "../kernels/fd/model-shots";
import type { SourceKind, VelocityComponent } from "../kernels/fd/simulation";
import type { SourceWavelet } from "../kernels/fd/wavelet";
import { modelShotRunner, shotExecutorOf } from "../workers/shot-executor";

export const forwardModelParams = z
  .object({
    mode: z.enum(["psv", "sh"]).default("psv").describe('Wave mode: "psv" (P-SV: vertical/horizontal force, explosive; Rayleigh waves) or "sh" (SH: force in y; Love waves)'),
    sourceKind: z
      .enum(["auto", "force-z", "force-x", "explosive", "force-y"])
      .default("auto")
      .describe('Source: "force-z" vertical force, "force-x" horizontal force, "explosive" pressure (P-SV); "force-y" (SH); "auto" = force-z for P-SV, force-y for SH'),
    component: z
      .enum(["auto", "z", "x", "y"])
      .default("auto")
      .describe('Recorded particle-velocity component: "z", "x" (P-SV) or "y" (SH); "auto" = z for P-SV, y for SH'),
    waveletFrom: z
      .enum(["ricker", "wavelet-slot"])
      .default("ricker")
      .describe('Source-time function: a Ricker wavelet, or the wavelet slot (one trace per gather id, or one for all)'),
    rickerPeakHz: z.number().positive().default(30).describe("Peak frequency of the Ricker wavelet, Hz"),
    timeShiftS: z
      .number()
      .optional()
      .describe("Delay of the source-time function, s; default 1.2/rickerPeakHz for the Ricker wavelet (it then starts near zero), 0 for a wavelet from the slot"),
    pmlCells: z.number().int().min(0).max(200).default(20).describe("Thickness of the absorbing boundary (convolutional PML) on the sides and bottom, grid cells"),
    pmlSmoothingCells: z
      .number()
      .int()
      .min(0)
      .max(20)
      .default(0)
      .describe(
        "Average the medium along the boundary inside the absorbing strips, over up to ± this many cells at their outer edge (none at the model edge); about 8 keeps long runs stable in models rough cell by cell at their edges, at the price of a few per cent returned from sharp layer boundaries. 0 = off",
      ),
    freeSurface: z.boolean().default(true).describe("Stress-free top surface; off = absorbing on all four sides"),
    dtS: z.number().positive().optional().describe("Solver time step, s; default 0.9 of the stability limit 0.606·dx/vmax, fitted to the output sample interval"),
    minPointsPerWavelength: z
      .number()
      .positive()
      .default(5)
      .describe("Fewest grid points per shortest S wavelength at the wavelet's highest frequency (its spectrum above 5% of the peak)"),
    snapshotTimesS: z.array(z.number().min(0)).default([]).describe("Times of wavefield snapshots, s (of one shot)"),
    snapshotGatherId: z.string().optional().describe("Gather whose snapshots are kept; default the first"),
    geometryFrom: z
      .enum(["auto", "gathers", "spread"])
      .default("auto")
      .describe('Shot geometry: the gathers\' trace headers, the spread below, or "auto" (gathers when present)'),
    spread: z
      .object({
        sourceXM: z.array(z.number()).min(1).describe("Source positions, m"),
        sourceZM: z.number().min(0).default(0).describe("Source depth, m"),
        firstReceiverXM: z.number().describe("Position of the first receiver, m"),
        receiverSpacingM: z.number().positive().describe("Receiver spacing, m"),
        receiverCount: z.number().int().min(1).describe("Number of receivers"),
        receiverZM: z.number().min(0).default(0).describe("Receiver depth, m"),
        sampleIntervalS: z.number().positive().default(0.00025).describe("Sample interval of the synthetic traces, s"),
        sampleCount: z.number().int().min(2).default(2000).describe("Samples per trace"),
        startTimeS: z.number().default(0).describe("Time of the first sample after the source instant, s"),
      })
      .optional()
      .describe("Spread for pure modelling studies (no field data)"),
  })
  .superRefine((p, ctx) => {
    const issue = (path: string[], message: string) => ctx.addIssue({ code: "custom", path, message });
    if (p.mode === "sh") {
      if (p.sourceKind !== "auto" && p.sourceKind !== "force-y") issue(["sourceKind"], `SH takes sourceKind "force-y" (or "auto"), got "${p.sourceKind}"`);
      if (p.component !== "auto" && p.component !== "y") issue(["component"], `SH records component "y" (or "auto"), got "${p.component}"`);
    } else {
      if (p.sourceKind === "force-y") issue(["sourceKind"], 'P-SV takes "force-z", "force-x" or "explosive"; "force-y" is for mode "sh"');
      if (p.component === "y") issue(["component"], 'P-SV records "z" or "x"; "y" is for mode "sh"');
    }
    if (p.geometryFrom === "spread" && !p.spread) issue(["spread"], 'geometryFrom "spread" needs a spread');
  });

export type ForwardModelParams = z.output<typeof forwardModelParams>;

/** Gather templates for a spread from the settings. */
export function spreadTemplates(s: NonNullable<ForwardModelParams["spread"]>, component: VelocityComponent): GatherTemplate[] {
  return s.sourceXM.map((sx, k) => {
    const id = `shot-${String(k + 1).padStart(2, "0")}`;
    const traces: TraceHeader[] = Array.from({ length: s.receiverCount }, (_, c) => {
      const rx = s.firstReceiverXM + c * s.receiverSpacingM;
      return {
        sourceFile: id, channel: c + 1, sourcePoint: k + 1, blow: 0, sourceX: sx, sourceZ: s.sourceZM,
        receiverX: rx, receiverZ: s.receiverZM, offset: rx - sx, stackCount: 1, component, dead: false,
      };
    });
    return { id, sampleIntervalS: s.sampleIntervalS, sampleCount: s.sampleCount, startTimeS: s.startTimeS, traces };
  });
}

function waveletFor(p: ForwardModelParams, gatherId: string, slot?: GatherSet): SourceWavelet {
  if (p.waveletFrom === "ricker") return { kind: "ricker", peakHz: p.rickerPeakHz, shiftS: p.timeShiftS };
  if (!slot || slot.gathers.length === 0) throw new StepInputError('waveletFrom "wavelet-slot" needs a wavelet from an earlier step.', "waveletFrom");
  const g: Gather = slot.gathers.find((w) => w.id === gatherId) ?? slot.gathers[0];
  return { kind: "samples", samples: g.data.subarray(0, g.sampleCount), intervalS: g.sampleIntervalS, startTimeS: g.startTimeS, shiftS: p.timeShiftS ?? 0 };
}

/** The solver's refusals (cells, time step, grid, positions) are this step's input errors, with the same message and field. */
export function asStepInputError(err: unknown): never {
  if (err instanceof FdSetupError) throw new StepInputError(err.message, err.field);
  throw err;
}

export const forwardModelStep = defineStep({
  id: "forward-model",
  version: 1,
  title: "Forward model",
  description:
    "Synthetic seismograms for every shot through the elastic model by a 2D velocity-stress finite-difference solver (staggered grid, Virieux 1986; 4th order in space, 2nd in time, Levander 1988; free surface by stress imaging; convolutional PML, Komatitsch & Martin 2007), P-SV or SH, in the layout of the field gathers so traces line up one to one. Refuses unstable time steps, too coarse grids and unphysical cells before any time step.",
  reads: ["model"],
  optionalReads: ["gathers", "wavelet"],
  writes: ["synthetic", "snapshots"],
  params: forwardModelParams,
  async run(input, p, ctx) {
    const model = input.model!;
    const component: VelocityComponent = p.component === "auto" ? (p.mode === "psv" ? "z" : "y") : p.component;
    const sourceKind: SourceKind = p.sourceKind === "auto" ? (p.mode === "psv" ? "force-z" : "force-y") : p.sourceKind;
    const useGathers = p.geometryFrom === "gathers" || (p.geometryFrom === "auto" && input.gathers && input.gathers.gathers.length > 0);
    let templates: GatherTemplate[];
    if (useGathers) {
      if (!input.gathers || input.gathers.gathers.length === 0) throw new StepInputError('geometryFrom "gathers" needs gathers from earlier steps.', "geometryFrom");
      templates = input.gathers.gathers.map((g) => ({ id: g.id, sampleIntervalS: g.sampleIntervalS, sampleCount: g.sampleCount, startTimeS: g.startTimeS, traces: g.traces }));
    } else {
      if (!p.spread) throw new StepInputError("No gathers to take the geometry from: describe a spread in the settings.", "spread");
      templates = spreadTemplates(p.spread, component);
    }
    throwIfAborted(ctx.signal);
    // Refuse a model too large to simulate before any allocation: one solver buffer per worker,
    // plus the snapshot frames of one shot (model cells × 4 bytes each).
    const footprint = solverFootprint(model, {
      mode: p.mode,
      pmlCells: p.pmlCells,
      freeSurface: p.freeSurface,
      workers: Math.min(templates.length, ctx.pool?.size ?? 1),
      extraBytes: p.snapshotTimesS.length * model.nx * model.nz * 4,
      extraLabel: `${p.snapshotTimesS.length} snapshots`,
    });
    if (footprint) checkModelFootprint(footprint, "model", MODEL_TOO_LARGE_REMEDY);
    // One wavelet for all shots unless the slot has one per gather.
    const perShotWavelet = p.waveletFrom === "wavelet-slot" && (input.wavelet?.gathers.length ?? 0) > 1;
    const common = {
      mode: p.mode, sourceKind, component, pmlCells: p.pmlCells, pmlSmoothingCells: p.pmlSmoothingCells, freeSurface: p.freeSurface, dtS: p.dtS,
      minPointsPerWavelength: p.minPointsPerWavelength, snapshotTimesS: p.snapshotTimesS.length > 0 ? p.snapshotTimesS : undefined,
    };
    const wavelets = perShotWavelet ? Object.fromEntries(templates.map((t) => [t.id, waveletFor(p, t.id, input.wavelet)])) : undefined;
    const res = await modelShots(model, templates, { ...common, wavelet: waveletFor(p, templates[0].id, input.wavelet) }, {
      // No executor and no pool (a bare context): the shots run here in turn.
      pool: ctx.shots || ctx.pool ? modelShotRunner(shotExecutorOf(ctx), "all-shots") : undefined,
      signal: ctx.signal,
      snapshotGatherId: p.snapshotGatherId,
      wavelets,
      onShot: (done, total, id) => ctx.progress(done / total, `shot ${id} (${done} of ${total})`),
    }).catch(asStepInputError);
    const { gathers, snapshots, dtS, steps, pointsPerWavelength: points } = res;
    return {
      outputs: { synthetic: { kind: "gathers", gathers }, ...(snapshots ? { snapshots } : {}) },
      summary: { shots: gathers.length, dtS, steps, pointsPerWavelength: Number(points.toFixed(2)), mode: p.mode, sourceKind, component },
    };
  },
});
