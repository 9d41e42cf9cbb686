import { NextResponse } from "next/server";
import { answer, parseId } from "@/app/lib/api";
import { readFieldCheck } from "@/app/lib/field-check-reads";
import { requirePermission } from "@/app/lib/session";
import { AppError } from "@/pipeline/errors";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/** GET /api/field-checks/:runId: the run's field-check report (verdicts per record, channel and trace, reasons, findings). */
export async function GET(_req: Request, ctx: { params: Promise<{ runId: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    const id = parseId((await ctx.params).runId, "runId");
    const found = readFieldCheck(id);
    if (!found) throw new AppError("not-found", `Run ${id} has no field check.`, { field: "runId" });
    // NaN (not judged) has no JSON form: it goes out as null.
    return new NextResponse(JSON.stringify({ ...found.check, report: found.report }, (_k, v) => (typeof v === "number" && !Number.isFinite(v) ? null : v)), {
      headers: { "content-type": "application/json" },
    });
  });
}
