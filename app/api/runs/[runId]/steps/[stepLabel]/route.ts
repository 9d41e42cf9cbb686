import { NextResponse } from "next/server";
import { answer, parseId } from "@/app/lib/api";
import { readRun } from "@/app/lib/reads";
import { requirePermission } from "@/app/lib/session";
import { AppError } from "@/pipeline/errors";
import { describeParams, getStep } from "@/pipeline/registry";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/**
 * GET /api/runs/:runId/steps/:stepLabel: one step of a run with its validated parameters and
 * the parameter documentation of its step type (drives the rerun form).
 */
export async function GET(_req: Request, ctx: { params: Promise<{ runId: string; stepLabel: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    const p = await ctx.params;
    const runId = parseId(p.runId, "runId");
    const run = readRun(runId);
    if (!run) throw new AppError("not-found", `No run with id ${runId}.`, { field: "runId" });
    // Next hands params over decoded already: decoding again turns a "%" in a label into a URIError.
    const label = p.stepLabel;
    const step = run.steps.find((s) => s.label === label);
    if (!step) {
      throw new AppError("not-found", `Run ${runId} has no step "${label}". Steps: ${run.steps.map((s) => s.label).join(", ")}.`, { field: "stepLabel" });
    }
    return NextResponse.json({ step, paramDocs: describeParams(getStep(step.stepId)) });
  });
}
