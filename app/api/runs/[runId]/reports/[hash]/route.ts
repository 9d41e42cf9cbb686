import { getDb } from "@/db/client";
import { listRunReports } from "@/db/queries/reports";
import { answer, parseId } from "@/app/lib/api";
import { requirePermission } from "@/app/lib/session";
import { AppError } from "@/pipeline/errors";
import { readStoredReport } from "@/pipeline/report/create";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/**
 * GET /api/runs/:runId/reports/:hash: a stored client report of the run as a PDF download. Only
 * reports recorded for this run (audit event "report.create") are served.
 */
export async function GET(_req: Request, ctx: { params: Promise<{ runId: string; hash: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    const p = await ctx.params;
    const runId = parseId(p.runId, "runId");
    if (!/^[0-9a-f]{64}$/.test(p.hash)) throw new AppError("bad-input", `"${p.hash}" is not a report hash (64 hex digits expected).`, { field: "hash" });
    const record = listRunReports(getDb(), runId).find((r) => r.hash === p.hash);
    if (!record) throw new AppError("not-found", `Run ${runId} has no report ${p.hash.slice(0, 12)}.`, { field: "hash" });
    const stored = readStoredReport(p.hash);
    // A copy with a buffer of its own: the decoded artifact's bytes are a view into a larger one.
    const pdf = new Uint8Array(stored.pdf);
    return new Response(pdf, {
      status: 200,
      headers: {
        "content-type": "application/pdf",
        "content-length": String(pdf.byteLength),
        "content-disposition": `attachment; filename="tracewright-run-${runId}-report-${p.hash.slice(0, 8)}.pdf"`,
        "cache-control": "private, no-store",
      },
    });
  });
}
