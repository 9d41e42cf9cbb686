import { NextResponse } from "next/server";
import { z } from "zod";
import { getDb } from "@/db/client";
import { runAuditTrail } from "@/db/queries/audit-search";
import { chainRecords, verifyAuditChain } from "@/db/queries/audit-chain";
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
    const db = getDb();
    const rows = runAuditTrail(db, runId);
    const chain = chainRecords(db, rows.map((r) => r.id));
    const events = toExportEvents(rows, chain);
    const name = `run-${runId}-audit-trail.${q.format}`;
    const headers = { "content-disposition": `attachment; filename="${name}"`, "cache-control": "private, no-store" };
    if (q.format === "json") {
      const verdict = verifyAuditChain(db);
      return NextResponse.json(
        {
          runId,
          exportedAt: new Date().toISOString(),
          chain: {
            construction: "SHA-256 hash chain over the whole audit trail (Schneier & Kelsey 1999; Crosby & Wallach 2009): hash = sha256(hashedText), hashedText = JSON array [\"tracewright-audit-event/1\", prevHash, id, at ms, actor user id, actor label, door, action, record type, record id, before JSON, after JSON]",
            intact: verdict.ok,
            checked: verdict.checked,
            firstBroken: verdict.firstBroken ?? null,
            head: { id: verdict.headId, hash: verdict.headHash },
          },
          events: events.map((e) => ({ ...e, hashedText: chain.get(e.id)?.text ?? null })),
        },
        { headers },
      );
    }
    return new Response(auditCsv(events), { headers: { ...headers, "content-type": "text/csv; charset=utf-8" } });
  });
}
