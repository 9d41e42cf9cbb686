/**
 * Step "dispersion-image": phase-velocity against frequency images of the surface waves by the
 * phase-shift method (Park, Miller & Xia 1998), one per window of receivers along the line (or
 * one for the whole spread), several shots stacked, with an automatic pick of the fundamental
 * mode (maximum per frequency within bounds, followed with a continuity constraint) and the hand
 * picks given in the settings (the control room saves them there, so cache and audit stay true).
 * Writes the `dispersion` slot; the gathers pass through unchanged.
 */
import { z } from "zod";
import { defineStep, StepInputError, throwIfAborted } from "../step";
import type { DispersionCurve, DispersionSet, Gather, GatherSet } from "../types";
import { evenAxis, phaseShiftImage, type PhaseShiftInput } from "../kernels/dispersion/phase-shift";
import { pickDispersionCurve } from "../kernels/dispersion/picking";

const handPickSchema = z.object({
  window: z.string().describe('Window id the picks belong to, e.g. "W01" (the only window is "W01" when windowReceivers is 0)'),
  mode: z.number().int().min(0).default(0).describe("Mode number: 0 the fundamental mode"),
  points: z
    .array(z.tuple([z.number().positive(), z.number().positive()]))
    .min(1)
    .describe("Picked points [frequency Hz, phase velocity m/s]"),
});

export const dispersionImageParams = z
  .object({
    /** @default 5 */
    minFrequencyHz: z.number().positive().default(5).describe("Lowest frequency of the image, Hz"),
    /** @default 80 */
    maxFrequencyHz: z.number().positive().default(80).describe("Highest frequency of the image, Hz (below the Nyquist frequency of the gathers)"),
    /** @default 0.5 */
    frequencyStepHz: z.number().positive().default(0.5).describe("Frequency step of the image, Hz"),
    /** @default 50 */
    minVelocityMps: z.number().positive().default(50).describe("Lowest trial phase velocity, m/s"),
    /** @default 800 */
    maxVelocityMps: z.number().positive().default(800).describe("Highest trial phase velocity, m/s"),
    /** @default 2 */
    velocityStepMps: z.number().positive().default(2).describe("Trial phase-velocity step, m/s"),
    /** @default 2 */
    minOffsetM: z
      .number()
      .min(0)
      .default(2)
      .describe("Smallest |offset| used, m (common practice: leave out offsets shorter than about a third of the longest wavelength kept, where near-field effects bend the phase)"),
    /** @default 1000 */
    maxOffsetM: z.number().positive().default(1000).describe("Largest |offset| used, m"),
    /** @default [] */
    shots: z.array(z.string()).default([]).describe("Ids of the gathers (shots) to stack; empty: all"),
    /** @default "z" */
    component: z.enum(["z", "x"]).default("z").describe("Recorded component used (Rayleigh waves: z, or x)"),
    /** @default 0 */
    windowReceivers: z
      .number()
      .int()
      .min(0)
      .default(0)
      .describe("Receivers per moving window along the line (count); 0: one window over every receiver"),
    /** @default 0 */
    windowStepReceivers: z.number().int().min(0).default(0).describe("Receivers the window moves by (count); 0: half the window"),
    /** @default "per-frequency" */
    normalisation: z
      .enum(["per-frequency", "none"])
      .default("per-frequency")
      .describe('"per-frequency": each image row divided by its maximum; "none": the mean coherence over the stacked shots, in [0, 1] (no unit)'),
    /** @default 0 */
    pickMinVelocityMps: z.number().min(0).default(0).describe("Lowest phase velocity the automatic pick may take, m/s; 0: the image's lowest"),
    /** @default 0 */
    pickMaxVelocityMps: z.number().min(0).default(0).describe("Highest phase velocity the automatic pick may take, m/s; 0: the image's highest"),
    /** @default 0 */
    pickMinFrequencyHz: z.number().min(0).default(0).describe("Lowest frequency picked automatically, Hz; 0: the image's lowest"),
    /** @default 0 */
    pickMaxFrequencyHz: z.number().min(0).default(0).describe("Highest frequency picked automatically, Hz; 0: the image's highest"),
    /** @default 8 */
    pickMaxStepPercent: z
      .number()
      .positive()
      .max(100)
      .default(8)
      .describe("Continuity: largest change of the pick from one frequency of the image to the next, percent of the previous pick (scale it with frequencyStepHz)"),
    /** @default 0.5 */
    pickMinRelativeValue: z
      .number()
      .min(0)
      .max(1)
      .default(0.5)
      .describe("A pick needs an image value of at least this fraction of the row's largest value within the bounds (no unit)"),
    /** @default 3 */
    pickMaxGapFrequencies: z
      .number()
      .int()
      .min(1)
      .default(3)
      .describe("The automatic pick stops following the curve after this many frequencies in a row without a clear peak (count)"),
    /** @default "slowest" */
    pickPeak: z
      .enum(["slowest", "strongest"])
      .default("slowest")
      .describe(
        'Which peak the automatic pick takes at each frequency: "slowest" the slowest clear peak (the fundamental mode is the slowest Rayleigh mode; common practice), "strongest" the largest value within the bounds',
      ),
    /** @default true */
    pickAboveAliasing: z
      .boolean()
      .default(true)
      .describe(
        "The automatic pick stays above f × the trace spacing at each frequency: slower, the image repeats faster waves (spatial aliasing), and the slowest-peak rule would take the repetition",
      ),
    /** @default [] */
    handPicks: z
      .array(handPickSchema)
      .default([])
      .describe("Picks made by hand (in the control room), per window and mode; the inversion uses a window's hand pick of mode 0 instead of the automatic one"),
  })
  .superRefine((p, ctx) => {
    const issue = (path: string, message: string) => ctx.addIssue({ code: "custom", path: [path], message });
    if (p.maxFrequencyHz <= p.minFrequencyHz) issue("maxFrequencyHz", `maxFrequencyHz (${p.maxFrequencyHz} Hz) must exceed minFrequencyHz (${p.minFrequencyHz} Hz)`);
    if (p.maxVelocityMps <= p.minVelocityMps) issue("maxVelocityMps", `maxVelocityMps (${p.maxVelocityMps} m/s) must exceed minVelocityMps (${p.minVelocityMps} m/s)`);
    if (p.maxOffsetM <= p.minOffsetM) issue("maxOffsetM", `maxOffsetM (${p.maxOffsetM} m) must exceed minOffsetM (${p.minOffsetM} m)`);
    if ((p.maxVelocityMps - p.minVelocityMps) / p.velocityStepMps > 20000) issue("velocityStepMps", `velocityStepMps ${p.velocityStepMps} m/s makes more than 20000 trial velocities`);
    if ((p.maxFrequencyHz - p.minFrequencyHz) / p.frequencyStepHz > 20000) issue("frequencyStepHz", `frequencyStepHz ${p.frequencyStepHz} Hz makes more than 20000 frequencies`);
    if (p.pickMaxVelocityMps > 0 && p.pickMaxVelocityMps <= p.pickMinVelocityMps) issue("pickMaxVelocityMps", `pickMaxVelocityMps (${p.pickMaxVelocityMps} m/s) must exceed pickMinVelocityMps (${p.pickMinVelocityMps} m/s)`);
    if (p.pickMaxFrequencyHz > 0 && p.pickMaxFrequencyHz <= p.pickMinFrequencyHz) issue("pickMaxFrequencyHz", `pickMaxFrequencyHz (${p.pickMaxFrequencyHz} Hz) must exceed pickMinFrequencyHz (${p.pickMinFrequencyHz} Hz)`);
    if (p.windowReceivers > 0 && p.windowReceivers < 3) issue("windowReceivers", `a window needs at least 3 receivers, got ${p.windowReceivers}`);
  });

export type DispersionImageParams = z.output<typeof dispersionImageParams>;

/** Windows of receivers along the line: [first, last] receiver positions, m. */
export function receiverWindows(positions: number[], windowReceivers: number, stepReceivers: number): Array<[number, number]> {
  const n = positions.length;
  if (n === 0) return [];
  if (windowReceivers === 0 || windowReceivers >= n) return [[positions[0], positions[n - 1]]];
  const step = stepReceivers > 0 ? stepReceivers : Math.max(1, Math.floor(windowReceivers / 2));
  const out: Array<[number, number]> = [];
  let start = 0;
  for (; start + windowReceivers <= n; start += step) out.push([positions[start], positions[start + windowReceivers - 1]]);
  // The last receivers, when the steps left them out.
  if (start - step + windowReceivers < n) out.push([positions[n - windowReceivers], positions[n - 1]]);
  return out;
}

/** Sorted distinct receiver positions (within 1 mm) of the live traces of the chosen component. */
function receiverPositions(gathers: Gather[], component: string): number[] {
  const xs = gathers.flatMap((g) => g.traces.filter((h) => !h.dead && h.component === component && Number.isFinite(h.receiverX)).map((h) => h.receiverX));
  xs.sort((a, b) => a - b);
  const out: number[] = [];
  for (const x of xs) if (out.length === 0 || x - out[out.length - 1] > 1e-3) out.push(x);
  return out;
}

const windowId = (i: number) => `W${String(i + 1).padStart(2, "0")}`;

export const dispersionImageStep = defineStep({
  id: "dispersion-image",
  version: 2,
  title: "Dispersion image",
  description:
    "Phase velocity against frequency images of the surface waves by the phase-shift method (Park, Miller & Xia 1998): unit-amplitude trace spectra, phase-shifted by ω·|offset|/c and summed, for one window of receivers or moving windows along the line, several shots stacked, normalised per frequency. " +
    "Picks the fundamental mode automatically (maximum per frequency within bounds, followed with a continuity limit, parabolic peak refinement) and keeps hand picks given in the settings.",
  reads: ["gathers"],
  writes: ["dispersion"],
  params: dispersionImageParams,
  async run(input, p, ctx) {
    const set = input.gathers as GatherSet;
    const chosen = p.shots.length === 0 ? set.gathers : set.gathers.filter((g) => p.shots.includes(g.id));
    const missing = p.shots.filter((id) => !set.gathers.some((g) => g.id === id));
    if (missing.length > 0) {
      throw new StepInputError(`shots names gathers that are not there: ${missing.join(", ")}. Gathers: ${set.gathers.map((g) => g.id).join(", ")}`, "shots");
    }
    if (chosen.length === 0) throw new StepInputError("there are no gathers to make a dispersion image of", "gathers");
    for (const g of chosen) {
      const nyquist = 0.5 / g.sampleIntervalS;
      if (p.maxFrequencyHz > nyquist) {
        throw new StepInputError(`maxFrequencyHz ${p.maxFrequencyHz} Hz is above the Nyquist frequency ${nyquist} Hz of gather "${g.id}"`, "maxFrequencyHz");
      }
    }
    const axes = {
      frequenciesHz: evenAxis(p.minFrequencyHz, p.maxFrequencyHz, p.frequencyStepHz, "frequency"),
      velocitiesMps: evenAxis(p.minVelocityMps, p.maxVelocityMps, p.velocityStepMps, "velocity"),
    };
    const positions = receiverPositions(chosen, p.component);
    if (positions.length < 3) {
      throw new StepInputError(`the chosen gathers hold ${positions.length} live receiver positions of component ${p.component}; a dispersion image needs at least 3 (run geometry first?)`, "component");
    }
    const spans = receiverWindows(positions, p.windowReceivers, p.windowStepReceivers);
    const knownIds = spans.map((_, i) => windowId(i));
    p.handPicks.forEach((h, i) => {
      if (!knownIds.includes(h.window)) throw new StepInputError(`handPicks[${i}] names window "${h.window}"; the windows are ${knownIds.join(", ")}`, `handPicks.${i}.window`);
      // A hand pick lies on the image it was picked on (half a step of slack at the edges).
      h.points.forEach(([f, c], j) => {
        if (f < p.minFrequencyHz - p.frequencyStepHz / 2 || f > p.maxFrequencyHz + p.frequencyStepHz / 2) {
          throw new StepInputError(`handPicks[${i}].points[${j}] is at ${f} Hz, outside the image's ${p.minFrequencyHz} to ${p.maxFrequencyHz} Hz`, `handPicks.${i}.points.${j}`);
        }
        if (c < p.minVelocityMps - p.velocityStepMps / 2 || c > p.maxVelocityMps + p.velocityStepMps / 2) {
          throw new StepInputError(`handPicks[${i}].points[${j}] is at ${c} m/s, outside the image's ${p.minVelocityMps} to ${p.maxVelocityMps} m/s`, `handPicks.${i}.points.${j}`);
        }
      });
    });

    const pickOptions = {
      minVelocityMps: p.pickMinVelocityMps > 0 ? p.pickMinVelocityMps : p.minVelocityMps,
      maxVelocityMps: p.pickMaxVelocityMps > 0 ? p.pickMaxVelocityMps : p.maxVelocityMps,
      minFrequencyHz: p.pickMinFrequencyHz > 0 ? p.pickMinFrequencyHz : p.minFrequencyHz,
      maxFrequencyHz: p.pickMaxFrequencyHz > 0 ? p.pickMaxFrequencyHz : p.maxFrequencyHz,
      maxStepFraction: p.pickMaxStepPercent / 100,
      minRelativeValue: p.pickMinRelativeValue,
      maxGapFrequencies: p.pickMaxGapFrequencies,
      preferSlowest: p.pickPeak === "slowest",
    };
    const result: DispersionSet = { kind: "dispersion", ...axes, normalisation: p.normalisation, windows: [] };
    const skipped: string[] = [];
    const tol = 1e-3;
    for (let w = 0; w < spans.length; w++) {
      throwIfAborted(ctx.signal);
      const [x0, x1] = spans[w];
      const inputs: PhaseShiftInput[] = [];
      const gatherIds: string[] = [];
      let traceCount = 0;
      let minOff = Infinity;
      let maxOff = -Infinity;
      for (const g of chosen) {
        const rows: number[] = [];
        const dist: number[] = [];
        g.traces.forEach((h, t) => {
          const d = Math.abs(h.offset);
          if (h.dead || h.component !== p.component || !(h.receiverX >= x0 - tol && h.receiverX <= x1 + tol)) return;
          if (!(d >= p.minOffsetM && d <= p.maxOffsetM)) return;
          rows.push(t);
          dist.push(d);
        });
        // Fewer than 3 traces say nothing about a phase velocity.
        if (rows.length < 3) continue;
        inputs.push({ data: g.data, sampleCount: g.sampleCount, sampleIntervalS: g.sampleIntervalS, startTimeS: g.startTimeS, traceRows: rows, distancesM: dist });
        gatherIds.push(g.id);
        traceCount += rows.length;
        for (const d of dist) {
          minOff = Math.min(minOff, d);
          maxOff = Math.max(maxOff, d);
        }
      }
      const id = windowId(w);
      if (inputs.length === 0) {
        skipped.push(id);
        ctx.log.warn(`window ${id} (${x0} to ${x1} m): no shot has 3 or more traces in the offset range ${p.minOffsetM} to ${p.maxOffsetM} m; left out`);
        continue;
      }
      const image = phaseShiftImage(inputs, axes, p.normalisation === "per-frequency");
      const auto = pickDispersionCurve(image, axes.frequenciesHz, axes.velocitiesMps, {
        ...pickOptions,
        aliasSpacingM: p.pickAboveAliasing ? traceSpacingM(inputs) : 0,
      });
      const picks: DispersionCurve[] = [curveFromPicks(axes.frequenciesHz, auto.velocitiesMps)];
      for (const h of p.handPicks.filter((x) => x.window === id)) {
        const pts = [...h.points].sort((a, b) => a[0] - b[0]);
        picks.push({ mode: h.mode, origin: "hand", frequenciesHz: Float64Array.from(pts.map((q) => q[0])), velocitiesMps: Float64Array.from(pts.map((q) => q[1])) });
      }
      result.windows.push({ id, centreX: 0.5 * (x0 + x1), receiverX0: x0, receiverX1: x1, gatherIds, traceCount, minOffsetM: minOff, maxOffsetM: maxOff, image, picks });
      ctx.progress((w + 1) / spans.length, id);
    }
    if (result.windows.length === 0) {
      throw new StepInputError(`no window has a shot with 3 or more traces between ${p.minOffsetM} and ${p.maxOffsetM} m |offset|: widen the offset range or the windows`, "minOffsetM");
    }
    const picked = result.windows.map((w) => w.picks[0].frequenciesHz.length);
    ctx.log.info(`dispersion images of ${result.windows.length} window(s), ${axes.frequenciesHz.length} frequencies × ${axes.velocitiesMps.length} velocities`);
    return {
      outputs: { dispersion: result },
      summary: {
        windows: result.windows.length,
        skippedWindows: skipped,
        frequencies: axes.frequenciesHz.length,
        velocities: axes.velocitiesMps.length,
        automaticPicksPerWindow: picked,
        handPicks: p.handPicks.length,
      },
      series: [
        {
          name: "dispersion-picks",
          xLabel: "frequency, Hz",
          yLabel: "phase velocity, m/s",
          points: result.windows.flatMap((w) =>
            w.picks.flatMap((c) => Array.from(c.frequenciesHz, (f, i) => ({ x: f, y: c.velocitiesMps[i], group: `${w.id} ${c.origin} mode ${c.mode}` }))),
          ),
        },
      ],
    };
  },
});

/** The automatic pick as a curve of mode 0 with the frequencies without a pick left out. */
function curveFromPicks(frequenciesHz: Float64Array, velocities: Float64Array): DispersionCurve {
  const f: number[] = [];
  const c: number[] = [];
  velocities.forEach((v, i) => {
    if (Number.isFinite(v)) {
      f.push(frequenciesHz[i]);
      c.push(v);
    }
  });
  return { mode: 0, origin: "automatic", frequenciesHz: Float64Array.from(f), velocitiesMps: Float64Array.from(c) };
}

export default dispersionImageStep;

/**
 * The spacing of a window's traces along the line, m: per shot the median step between its sorted
 * source–receiver distances, and the smallest of those over the shots (the finest sampling decides
 * where the image starts to repeat).
 */
export function traceSpacingM(inputs: PhaseShiftInput[]): number {
  let finest = Infinity;
  for (const s of inputs) {
    const d = Array.from(s.distancesM).sort((a, b) => a - b);
    const steps: number[] = [];
    for (let i = 1; i < d.length; i++) if (d[i] - d[i - 1] > 1e-6) steps.push(d[i] - d[i - 1]);
    if (steps.length === 0) continue;
    steps.sort((a, b) => a - b);
    finest = Math.min(finest, steps[Math.floor(steps.length / 2)]);
  }
  return Number.isFinite(finest) ? finest : 0;
}
