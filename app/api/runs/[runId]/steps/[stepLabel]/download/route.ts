import { z } from "zod";
import { answer, parseId, parseOr400 } from "@/app/lib/api";
import { loadArtifact } from "@/app/lib/artifacts";
import { downloadName } from "@/app/lib/downloads";
import { readRun } from "@/app/lib/reads";
import { requirePermission } from "@/app/lib/session";
import { AppError } from "@/pipeline/errors";
import { exportArtifact, exportFormatOf } from "@/pipeline/export";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

const querySchema = z.object({
  /** Which output of the step (default: gathers, synthetic or model, whichever it wrote, else the first). */
  slot: z.string().min(1).max(50).optional(),
});

const CONTENT_TYPES = { segy: "application/octet-stream", csv: "text/csv; charset=utf-8", json: "application/json; charset=utf-8" } as const;

/**
 * GET /api/runs/:runId/steps/:stepLabel/download?slot=: one result of a step as a file, written
 * by the same writers as `tracewright export` (pipeline/export.ts): gathers as SEG-Y rev 2.0,
 * models as CSV, anything else as JSON.
 */
export async function GET(req: Request, ctx: { params: Promise<{ runId: string; stepLabel: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    const p = await ctx.params;
    const runId = parseId(p.runId, "runId");
    const q = parseOr400(querySchema, Object.fromEntries(new URL(req.url).searchParams), "query");
    const run = readRun(runId);
    if (!run) throw new AppError("not-found", `No run with id ${runId}.`, { field: "runId" });
    const label = decodeURIComponent(p.stepLabel);
    const step = run.steps.find((s) => s.label === label);
    if (!step) throw new AppError("not-found", `Run ${runId} has no step "${label}".`, { field: "stepLabel" });
    const slots = Object.keys(step.outputs);
    if (slots.length === 0) throw new AppError("conflict", `Step ${label} of run ${runId} has no results (${step.status}).`);
    const slot = q.slot ?? ["gathers", "synthetic", "model"].find((s) => slots.includes(s)) ?? slots[0];
    const hash = step.outputs[slot];
    if (!hash) throw new AppError("not-found", `Step ${label} wrote ${slots.join(", ")}, not ${slot}.`, { field: "slot" });
    const value = await loadArtifact(hash);
    const format = exportFormatOf(value);
    const bytes = exportArtifact(value, format, `Tracewright run ${runId} step ${label} (${slot})`);
    return new Response(bytes as unknown as BodyInit, {
      status: 200,
      headers: {
        "content-type": CONTENT_TYPES[format],
        "content-length": String(bytes.byteLength),
        "content-disposition": `attachment; filename="${downloadName(runId, label, slot, format)}"`,
        "cache-control": "private, no-store",
      },
    });
  });
}
