/**
 * Checks the runner makes on every step result before anything is written: only declared slots,
 * and no gathers with NaN or infinite samples (one such sample makes a whole gather's spectrum
 * NaN downstream, so it is refused where it first appears, naming step, gather and trace).
 */
import { AppError } from "./errors";
import type { AnyStepDefinition } from "./step";
import type { GatherSet, SlotName } from "./types";

/** The first non-finite sample of a gather set, or null. */
export function findNonFiniteSample(set: GatherSet): { gatherId: string; traceIndex: number; sampleIndex: number; value: number; count: number } | null {
  for (const g of set.gathers) {
    const n = g.sampleCount;
    for (let i = 0; i < g.data.length; i++) {
      if (!Number.isFinite(g.data[i])) {
        let count = 0;
        for (let k = i; k < g.data.length; k++) if (!Number.isFinite(g.data[k])) count++;
        return { gatherId: g.id, traceIndex: Math.floor(i / n), sampleIndex: i % n, value: g.data[i], count };
      }
    }
  }
  return null;
}

function isGatherSet(v: unknown): v is GatherSet {
  return typeof v === "object" && v !== null && (v as { kind?: unknown }).kind === "gathers" && Array.isArray((v as GatherSet).gathers);
}

/** Throws "step-failed" (the runner prefixes the step label) naming the problem when a step's outputs break the runner's rules. */
export function checkStepOutputs(step: AnyStepDefinition, outputs: Record<string, unknown>): void {
  for (const [slot, value] of Object.entries(outputs)) {
    if (value === undefined) continue;
    if (!step.writes.includes(slot as SlotName)) {
      throw new AppError("internal", `Step ${step.id} wrote "${slot}", which it does not declare`);
    }
    if (isGatherSet(value)) {
      const bad = findNonFiniteSample(value);
      if (bad) {
        const trace = value.gathers.find((g) => g.id === bad.gatherId)!.traces[bad.traceIndex];
        throw new AppError(
          "step-failed",
          `wrote ${bad.value} in ${slot}: gather ${bad.gatherId}, trace ${bad.traceIndex + 1}${trace ? ` (channel ${trace.channel}, file ${trace.sourceFile})` : ""}, sample ${bad.sampleIndex + 1}; ${bad.count} non-finite sample(s) in that gather from there on. No step may emit NaN or infinite samples.`,
          { field: slot },
        );
      }
    }
  }
}
