import { NextResponse } from "next/server";
import { z } from "zod";
import { getDb, writeTransaction } from "@/db/client";
import { recordAudit } from "@/db/queries/audit";
import { listReviews } from "@/db/queries/reviews";
import { addReviewOnce } from "@/db/queries/review-decisions";
import { answer, answerChange, parseId, parseOr400 } from "@/app/lib/api";
import { requirePermission, webActor } from "@/app/lib/session";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/** GET /api/runs/:runId/reviews: the decisions on a run, newest first. */
export async function GET(_req: Request, ctx: { params: Promise<{ runId: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    const runId = parseId((await ctx.params).runId, "runId");
    return NextResponse.json({ reviews: listReviews(getDb(), runId) });
  });
}

const reviewSchema = z.object({
  decision: z.enum(["approved", "returned"]),
  comment: z.string().max(4000).default(""),
});

/**
 * POST /api/runs/:runId/reviews: approve or send back (lead, admin); recorded in the audit trail.
 * A decision that repeats the latest one is refused (409), as the control room's action does.
 */
export async function POST(req: Request, ctx: { params: Promise<{ runId: string }> }) {
  return answerChange(req, async (json) => {
    const user = await requirePermission("runs.review");
    const runId = parseId((await ctx.params).runId, "runId");
    const body = parseOr400(reviewSchema, json, "body");
    const db = getDb();
    const review = writeTransaction(db, (tx) => {
      const r = addReviewOnce(tx, { runId, reviewerUserId: user.id, decision: body.decision, comment: body.comment });
      recordAudit(tx, {
        actor: webActor(user),
        action: body.decision === "approved" ? "review.approve" : "review.return",
        entityType: "run",
        entityId: runId,
        after: { decision: r.decision, comment: r.comment },
      });
      return r;
    });
    return NextResponse.json({ review }, { status: 201 });
  });
}
