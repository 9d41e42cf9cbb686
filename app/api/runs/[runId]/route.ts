import { NextResponse } from "next/server";
import { answer, parseId } from "@/app/lib/api";
import { readRun } from "@/app/lib/reads";
import { requirePermission } from "@/app/lib/session";
import { AppError } from "@/pipeline/errors";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/** GET /api/runs/:runId: the run with its steps, reviews and parent chain. */
export async function GET(_req: Request, ctx: { params: Promise<{ runId: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    const id = parseId((await ctx.params).runId, "runId");
    const run = readRun(id);
    if (!run) throw new AppError("not-found", `No run with id ${id}.`, { field: "runId" });
    return NextResponse.json(run);
  });
}
