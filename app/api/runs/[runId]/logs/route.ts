import { NextResponse } from "next/server";
import { z } from "zod";
import { answer, parseId, parseOr400 } from "@/app/lib/api";
import { readLogs, readRun } from "@/app/lib/reads";
import { requirePermission } from "@/app/lib/session";
import { AppError } from "@/pipeline/errors";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

const querySchema = z.object({
  step: z.coerce.number().int().positive().optional(),
  after: z.coerce.number().int().min(0).optional(),
  limit: z.coerce.number().int().min(1).max(5000).default(1000),
});

/** GET /api/runs/:runId/logs?step=&after=: log lines after an id (poll with the last id seen). */
export async function GET(req: Request, ctx: { params: Promise<{ runId: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    const runId = parseId((await ctx.params).runId, "runId");
    const q = parseOr400(querySchema, Object.fromEntries(new URL(req.url).searchParams), "query");
    const lines = readLogs(runId, { runStepId: q.step, afterId: q.after, limit: q.limit });
    if (lines.length === 0 && q.after === undefined && !readRun(runId)) {
      throw new AppError("not-found", `No run with id ${runId}.`, { field: "runId" });
    }
    return NextResponse.json({ lines, lastId: lines.at(-1)?.id ?? q.after ?? 0 });
  });
}
