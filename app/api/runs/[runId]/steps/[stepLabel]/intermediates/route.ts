import { NextResponse } from "next/server";
import { answer, parseId } from "@/app/lib/api";
import { readIntermediates, readRun } from "@/app/lib/reads";
import { requirePermission } from "@/app/lib/session";
import { AppError } from "@/pipeline/errors";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/**
 * GET /api/runs/:runId/steps/:stepLabel/intermediates: the intermediate results a step recorded
 * while it ran (kind, index, label, artifact hash, meta, time), ordered by kind and index.
 * Readable while the step runs; a cache hit lists those of the step that computed it.
 */
export async function GET(_req: Request, ctx: { params: Promise<{ runId: string; stepLabel: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    const p = await ctx.params;
    const runId = parseId(p.runId, "runId");
    const run = readRun(runId);
    if (!run) throw new AppError("not-found", `No run with id ${runId}.`, { field: "runId" });
    const label = decodeURIComponent(p.stepLabel);
    const step = run.steps.find((s) => s.label === label);
    if (!step) {
      throw new AppError("not-found", `Run ${runId} has no step "${label}". Steps: ${run.steps.map((s) => s.label).join(", ")}.`, { field: "stepLabel" });
    }
    return NextResponse.json({ runId, step: step.label, status: step.status, intermediates: readIntermediates(step.id) });
  });
}
