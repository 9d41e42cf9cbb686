/**
 * Step "spectra": amplitude spectra per trace and their mean per gather (over live traces), for
 * the control room to plot when choosing filter corners. The gathers pass through unchanged.
 */
import { z } from "zod";
import { defineStep, StepInputError, throwIfAborted } from "../step";
import type { GatherSet, SpectrumSet } from "../types";
import { amplitudeSpectra, meanSpectrum, spectrumFrequencies } from "../kernels/spectrum";
import { runTraceBlocks } from "../workers/trace-blocks";

export const spectraParams = z.object({
  /** @default 5 */
  taperPercent: z.number().min(0).max(50).default(5).describe("Cosine taper at each trace end before the FFT, percent of the trace length"),
  /** @default null */
  maxFrequencyHz: z.number().positive().nullable().default(null).describe("Highest frequency kept, Hz (null: Nyquist)"),
});

export type SpectraParams = z.output<typeof spectraParams>;

export const spectraStep = defineStep({
  id: "spectra",
  version: 1,
  title: "Amplitude spectra",
  description:
    "Amplitude spectrum of every trace (cosine-tapered, zero-padded FFT; |X(f)|·Δt) and the mean over the live traces of each gather, " +
    "from 0 Hz to Nyquist or a chosen limit. All gathers must share one sample interval and length so the spectra share one axis.",
  reads: ["gathers"],
  writes: ["spectra"],
  params: spectraParams,
  async run(input, params, ctx) {
    const set = input.gathers as GatherSet;
    if (set.gathers.length === 0) throw new StepInputError("there are no gathers to take spectra of", "gathers");
    const g0 = set.gathers[0];
    for (const g of set.gathers) {
      if (g.sampleIntervalS !== g0.sampleIntervalS || g.sampleCount !== g0.sampleCount) {
        throw new StepInputError(
          `gather "${g.id}" has ${g.sampleCount} samples of ${g.sampleIntervalS * 1000} ms, gather "${g0.id}" ${g0.sampleCount} of ${g0.sampleIntervalS * 1000} ms; resample them to one grid (time-window step) first`,
          "gathers",
        );
      }
    }
    const maxF = params.maxFrequencyHz ?? Infinity;
    const frequenciesHz = spectrumFrequencies(g0.sampleCount, g0.sampleIntervalS, maxF);
    const nf = frequenciesHz.length;
    const taperFraction = params.taperPercent / 100;
    const result: SpectrumSet = { kind: "spectra", frequenciesHz, gathers: [] };
    let live = 0;
    for (let gi = 0; gi < set.gathers.length; gi++) {
      throwIfAborted(ctx.signal);
      const g = set.gathers[gi];
      const ns = g.sampleCount;
      const parts = await runTraceBlocks(ctx, g.data, g.traces.length, ns, {
        local: (block, tc) => amplitudeSpectra(block, tc, ns, g.sampleIntervalS, taperFraction, maxF).perTrace,
        remote: (pool, block, tc) =>
          pool.run(
            "spectraTraceBlock",
            { data: block, traceCount: tc, sampleCount: ns, sampleIntervalS: g.sampleIntervalS, taperFraction, maxFrequencyHz: maxF },
            { transfer: [block.buffer as ArrayBuffer], signal: ctx.signal },
          ),
      });
      const perTrace = parts.length === 1 ? parts[0].result : new Float32Array(g.traces.length * nf);
      if (parts.length > 1) for (const p of parts) perTrace.set(p.result, p.firstTrace * nf);
      // Live: not marked dead and not all zero (a killed or muted-out trace would pull the mean down).
      const include = g.traces.map((h, t) => !h.dead && g.data.subarray(t * ns, (t + 1) * ns).some((x) => x !== 0));
      live += include.filter(Boolean).length;
      result.gathers.push({ gatherId: g.id, mean: meanSpectrum(perTrace, g.traces.length, nf, include), perTrace });
      ctx.progress((gi + 1) / set.gathers.length, g.id);
    }
    const traces = set.gathers.reduce((s, g) => s + g.traces.length, 0);
    ctx.log.info({ traces, live, frequencies: nf }, `spectra of ${traces} traces (${live} live) at ${nf} frequencies up to ${frequenciesHz[nf - 1].toFixed(1)} Hz`);
    return {
      outputs: { spectra: result },
      summary: { gathers: result.gathers.length, traces, liveTraces: live, frequencies: nf, maxFrequencyHz: frequenciesHz[nf - 1], frequencyStepHz: nf > 1 ? frequenciesHz[1] : null },
    };
  },
});

export default spectraStep;
