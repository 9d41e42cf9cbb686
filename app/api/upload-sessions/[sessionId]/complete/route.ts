import { NextResponse } from "next/server";
import { z } from "zod";
import { getDb } from "@/db/client";
import { answerChange, parseId, parseOr400 } from "@/app/lib/api";
import { requirePermission, webActor } from "@/app/lib/session";
import { launchInBackground } from "@/pipeline/launch";
import { completeUpload } from "@/pipeline/uploads";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

const completeSchema = z.object({
  /** Leave out files still on their way (recorded as refused) instead of refusing to complete. */
  leaveOutUnfinished: z.boolean().default(false),
});

/** POST /api/upload-sessions/:id/complete: the accepted files become one dataset; the profile's pipeline, if any, is queued and started. */
export async function POST(req: Request, ctx: { params: Promise<{ sessionId: string }> }) {
  return answerChange(req, async (json) => {
    const user = await requirePermission("uploads.send");
    const id = parseId((await ctx.params).sessionId, "sessionId");
    const body = parseOr400(completeSchema, json, "body");
    const done = await completeUpload(getDb(), id, webActor(user), body);
    if (done.runId !== null) launchInBackground(done.runId);
    return NextResponse.json({ datasetId: done.datasetId, runId: done.runId, files: done.files, contentHash: done.contentHash, pipeline: done.pipeline });
  });
}
