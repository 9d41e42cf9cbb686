/**
 * Step "field-check": checks raw records (one per blow, before stacking) as they arrive in the
 * field, and gives a verdict per shot, per channel and per trace: ok, warn or reshoot, with the
 * reasons. Checks: dead traces and channels, noisy traces and blows, reversed polarity, trigger
 * timing slips, a source logged at the wrong position (asymmetric move-out about the logged
 * source), mains hum and clipped samples. Numerics in pipeline/kernels/field-checks.ts
 * and pipeline/kernels/field-check-verdicts.ts; methods are cited there.
 *
 * Writes a report (role "field-check", data {@link FieldCheckReport}); the gathers pass through.
 */
import { z } from "zod";
import { defineStep, StepInputError, throwIfAborted } from "../step";
import type { GatherSet } from "../types";
import { checkFieldShots, type FieldCheckResult, type FieldShot } from "../kernels/field-check-verdicts";

export const fieldCheckParams = z
  .object({
    /** @default 0.05 */
    deadLevelRatio: z.number().positive().max(1).default(0.05).describe("A trace whose RMS level is below this fraction of the median of its neighbours' is dead (ratio, 0.05 = −26 dB)"),
    /** @default 4 */
    levelNeighbours: z.number().int().min(1).max(20).default(4).describe("Traces on each side whose levels make the neighbours' median (count)"),
    /** @default 0.5 */
    deadChannelShare: z.number().gt(0).max(1).default(0.5).describe("A channel dead (or noisy) in at least this share of the records is a channel fault, reported once (fraction)"),
    /** @default 2000 */
    fastestVelocityMps: z.number().positive().default(2000).describe("Fastest plausible first-arrival velocity, m/s: noise is measured before |offset| / this"),
    /** @default 2 */
    noiseGuardMs: z.number().min(0).default(2).describe("Gap between the end of the noise window and the earliest possible arrival, ms"),
    /** @default 5 */
    noiseMinWindowMs: z.number().positive().default(5).describe("Shortest noise window that is measured, ms"),
    /** @default 1.5 */
    noiseMinOffsetM: z.number().min(0).default(1.5).describe("Traces nearer the source than this are not measured for noise, m (short pre-trigger window, the source's own near field)"),
    /** @default 5 */
    noisyTraceRatio: z.number().gt(1).default(5).describe("A trace whose noise exceeds this multiple of the folder's median noise is noisy (ratio)"),
    /** @default 2.5 */
    noisyBlowWarnRatio: z.number().gt(1).default(2.5).describe("A blow whose median trace noise exceeds this multiple of the folder's median is noisy: warn (ratio)"),
    /** @default 3 */
    noisyBlowReshootRatio: z.number().gt(1).default(3).describe("Above this multiple of the folder's median noise a noisy blow needs repeating: reshoot (ratio)"),
    /** @default 2 */
    polarityNeighbours: z.number().int().min(1).max(10).default(2).describe("Neighbouring traces on each side a trace's polarity is compared with (count)"),
    /** @default 250 */
    correlationWindowEndMs: z.number().min(20).default(250).describe("End of the window compared between traces (polarity, symmetry) and between blows (trigger), ms after the source; it starts at the source instant"),
    /** @default 100 */
    slowestVelocityMps: z.number().positive().default(100).describe("Slowest wave between neighbouring receivers, m/s: bounds the lag searched for polarity"),
    /** @default 3 */
    polaritySlackMs: z.number().min(0).default(3).describe("Lag searched for polarity on top of the move-out bound, ms"),
    /** @default -0.65 */
    reversedScore: z.number().min(-1).max(0).default(-0.65).describe("A trace whose median correlation with its neighbours is below this is reversed (correlation coefficient)"),
    /** @default 0.5 */
    reversedChannelShare: z.number().gt(0).max(1).default(0.5).describe("A channel reversed in at least this share of the records is a wiring fault, reported once (fraction)"),
    /** @default 0.5 */
    symmetryMinOffsetM: z.number().min(0).default(0.5).describe("Source position: nearest offset of the mirrored trace pairs compared, m"),
    /** @default 12 */
    symmetryMaxOffsetM: z.number().positive().default(12).describe("Source position: farthest offset of the mirrored trace pairs compared, m"),
    /** @default 4 */
    minMirrorPairs: z.number().int().min(1).default(4).describe("Source position: mirrored trace pairs needed (count); a source near the end of the spread has fewer and is not judged"),
    /** @default 5 */
    maxSourceShiftM: z.number().positive().default(5).describe("Source position: largest difference from the log searched, m"),
    /** @default 15 */
    maxTriggerSlipMs: z.number().positive().default(15).describe("Trigger: largest time shift against the other blows searched, ms"),
    /** @default 0.9 */
    sameSourceCorrelation: z.number().min(0).max(1).default(0.9).describe("Two blows whose records correlate at least this well (at the best lag) were shot at one position; their lag is the trigger slip (correlation coefficient)"),
    /** @default 1 */
    blowCompareIntervalMs: z.number().positive().default(1).describe("Traces and blows are correlated on means over blocks of this length, ms (speed; keep it below a quarter period of the highest frequency that matters)"),
    /** @default 0.7 */
    minSymmetry: z.number().min(-1).max(1).default(0.7).describe("Source position from the record alone: judged only where the mirrored traces correlate at least this well about the best point (correlation coefficient); strong lateral changes make records asymmetric"),
    /** @default 0.6 */
    sourceWarnM: z.number().positive().default(0.6).describe("Source position: difference from the log that warns, m"),
    /** @default 1 */
    sourceReshootM: z.number().positive().default(1).describe("Source position: difference from the log that needs action before the crew leaves (reshoot), m"),
    /** @default 2 */
    triggerWarnMs: z.number().positive().default(2).describe("Trigger: a record shifted this much against the other blows at its source position warns, ms"),
    /** @default 4 */
    triggerReshootMs: z.number().positive().default(4).describe("Trigger: off by this much needs the blow repeated (reshoot), ms"),
    /** @default [50, 60] */
    mainsHz: z.array(z.number().positive()).default([50, 60]).describe("Mains frequencies checked, Hz (both, since a site may see either)"),
    /** @default 3 */
    mainsHarmonics: z.number().int().min(1).max(10).default(3).describe("Harmonics checked per mains frequency, the fundamental included (count)"),
    /** @default 30 */
    humWarnDb: z.number().default(30).describe("Mains line above the mean of the neighbouring bins by this much warns, dB"),
    /** @default null */
    humReshootDb: z.number().nullable().default(null).describe("Mains line level that needs a reshoot, dB (null: hum alone never does, a notch filter removes it)"),
    /** @default 3 */
    clipMinRun: z.number().int().min(2).default(3).describe("Clipping: shortest run of samples at the trace's largest magnitude that counts (samples)"),
    /** @default 1 */
    clipWarnSamples: z.number().int().min(1).default(1).describe("Clipping: clipped samples in a trace that warn (count)"),
    /** @default 20 */
    clipReshootSamples: z.number().int().min(1).default(20).describe("Clipping: clipped samples in a trace that need the blow repeated (count)"),
  })
  .superRefine((p, ctx) => {
    const order = (lo: keyof typeof p, hi: keyof typeof p) => {
      if ((p[lo] as number) > (p[hi] as number)) ctx.addIssue({ code: "custom", path: [hi], message: `${String(hi)} (${p[hi]}) must not be below ${String(lo)} (${p[lo]})` });
    };
    order("noisyBlowWarnRatio", "noisyBlowReshootRatio");
    order("sourceWarnM", "sourceReshootM");
    order("triggerWarnMs", "triggerReshootMs");
    order("clipWarnSamples", "clipReshootSamples");
    order("symmetryMinOffsetM", "symmetryMaxOffsetM");
    if (p.humReshootDb !== null && p.humReshootDb < p.humWarnDb) {
      ctx.addIssue({ code: "custom", path: ["humReshootDb"], message: `humReshootDb (${p.humReshootDb}) must not be below humWarnDb (${p.humWarnDb})` });
    }
  });

export type FieldCheckParams = z.output<typeof fieldCheckParams>;

/** Data of the "field-check" report. */
export interface FieldCheckReport extends FieldCheckResult {
  /** The settings the checks ran with. */
  settings: FieldCheckParams;
}

export const fieldCheckStep = defineStep({
  id: "field-check",
  version: 1,
  title: "Field checks of raw records",
  description:
    "Checks every raw record (one per blow, before the stack) for dead and noisy traces, noisy blows, reversed polarity (correlation with neighbours), " +
    "trigger timing slips (cross-correlation with the other blows at the same position) and source position slips (asymmetric move-out: " +
    "the point about which mirrored traces agree best, against the logged position), " +
    "mains hum (Hann-windowed line level against its neighbouring band) and clipped samples; gives a verdict per shot, channel and trace " +
    "(ok, warn, reshoot) with the reasons. The gathers pass through unchanged.",
  reads: ["gathers"],
  writes: ["report"],
  params: fieldCheckParams,
  async run(input, params, ctx) {
    const set = input.gathers as GatherSet;
    if (set.gathers.length === 0) throw new StepInputError("there are no records to check", "gathers");
    const shots: FieldShot[] = set.gathers.map((g) => {
      if (g.traces.length === 0) throw new StepInputError(`record "${g.id}" has no traces`, "gathers");
      const stacked = g.traces.find((h) => h.stackCount > 1 || h.blow === 0);
      if (stacked) {
        throw new StepInputError(`record "${g.id}" is a vertical stack (channel ${stacked.channel}): the field check works on raw records, put it before vertical-stack`, "gathers");
      }
      const h0 = g.traces[0];
      const endS = g.startTimeS + g.sampleCount * g.sampleIntervalS;
      if (endS * 1000 < params.correlationWindowEndMs * 0.5) {
        throw new StepInputError(`record "${g.id}" ends at ${(endS * 1000).toFixed(1)} ms, before half the polarity window (${params.correlationWindowEndMs} ms)`, "correlationWindowEndMs");
      }
      return {
        id: g.id,
        file: h0.sourceFile,
        sourcePoint: h0.sourcePoint,
        blow: h0.blow,
        sourceX: h0.sourceX,
        sampleIntervalS: g.sampleIntervalS,
        startTimeS: g.startTimeS,
        sampleCount: g.sampleCount,
        channel: g.traces.map((h) => h.channel),
        receiverX: g.traces.map((h) => h.receiverX),
        data: g.data,
      };
    });
    const started = performance.now();
    const result = checkFieldShots(shots, params, (done, total) => {
      throwIfAborted(ctx.signal);
      ctx.progress(done / total, shots[done - 1].id);
    });
    const ms = performance.now() - started;
    const { counts } = result;
    ctx.log.info(
      { shots: counts.shots, reshoot: counts.shotsReshoot, warn: counts.shotsWarn, findings: result.findings.length, msPerShot: ms / counts.shots },
      `field check of ${counts.shots} records: ${result.findings.length} findings, verdict ${result.verdict} (${(ms / counts.shots).toFixed(1)} ms per record)`,
    );
    for (const f of result.findings) ctx.log[f.verdict === "reshoot" ? "warn" : "info"]({ kind: f.kind, gatherId: f.gatherId, channel: f.channel }, f.message);
    const report: FieldCheckReport = { ...result, settings: params };
    return {
      outputs: { report: { kind: "json", role: "field-check", data: report } },
      summary: {
        verdict: result.verdict,
        records: counts.shots,
        findings: result.findings.length,
        recordsToReshoot: counts.shotsReshoot,
        recordsWithWarnings: counts.shotsWarn,
        msPerRecord: Math.round((ms / counts.shots) * 10) / 10,
      },
      series: [
        {
          name: "source-position-error",
          xLabel: "logged source x (m)",
          yLabel: "source position from first arrivals minus log (m)",
          points: result.shots.filter((s) => Number.isFinite(s.sourceErrorM)).map((s) => ({ x: s.loggedSourceXM, y: s.sourceErrorM, group: `blow ${s.blow}` })),
        },
      ],
    };
  },
});

export default fieldCheckStep;
