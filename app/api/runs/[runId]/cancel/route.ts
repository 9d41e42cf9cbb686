import { NextResponse } from "next/server";
import { getDb } from "@/db/client";
import { answerChange, parseId } from "@/app/lib/api";
import { requirePermission, webActor } from "@/app/lib/session";
import { requestCancel } from "@/pipeline/run-create";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/** POST /api/runs/:runId/cancel: ask a queued or running run to stop at its next check. */
export async function POST(req: Request, ctx: { params: Promise<{ runId: string }> }) {
  return answerChange(req, async () => {
    const user = await requirePermission("runs.cancel");
    const runId = parseId((await ctx.params).runId, "runId");
    requestCancel(getDb(), runId, webActor(user));
    return NextResponse.json({ runId, cancelRequested: true }, { status: 202 });
  });
}
