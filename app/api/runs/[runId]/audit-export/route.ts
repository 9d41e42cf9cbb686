import { NextResponse } from "next/server";
import { z } from "zod";
import { getDb } from "@/db/client";
import { runAuditTrail } from "@/db/queries/audit-search";
import { answer, parseId, parseOr400 } from "@/app/lib/api";
import { auditCsv, toExportEvents } from "@/app/lib/audit-export";
import { readRun } from "@/app/lib/reads";
import { requirePermission } from "@/app/lib/session";
import { AppError } from "@/pipeline/errors";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

const querySchema = z.object({ format: z.enum(["csv", "json"]).default("csv") });

/** GET /api/runs/:runId/audit-export?format=csv|json: every audit event about a run, oldest first, as a file. */
export async function GET(req: Request, ctx: { params: Promise<{ runId: string }> }) {
  return answer(async () => {
    await requirePermission("audit.read");
    const runId = parseId((await ctx.params).runId, "runId");
    const q = parseOr400(querySchema, Object.fromEntries(new URL(req.url).searchParams), "query");
    if (!readRun(runId)) throw new AppError("not-found", `No run with id ${runId}.`, { field: "runId" });
    const events = toExportEvents(runAuditTrail(getDb(), runId));
    const name = `run-${runId}-audit-trail.${q.format}`;
    const headers = { "content-disposition": `attachment; filename="${name}"`, "cache-control": "private, no-store" };
    if (q.format === "json") return NextResponse.json({ runId, exportedAt: new Date().toISOString(), events }, { headers });
    return new Response(auditCsv(events), { headers: { ...headers, "content-type": "text/csv; charset=utf-8" } });
  });
}
