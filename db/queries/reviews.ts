/** A lead's decisions on runs: approved, or returned with a comment. */
import { desc, eq } from "drizzle-orm";
import type { Db } from "../client";
import { reviews, runs, users } from "../schema";
import { RecordError } from "../errors";
import { queueReviewDecisionNotice } from "./notices";

export type ReviewDecision = "approved" | "returned";

export interface ReviewRow {
  id: number;
  runId: number;
  decision: ReviewDecision;
  comment: string;
  reviewerUserId: number;
  reviewerName: string;
  at: Date;
}

/** Reviews of a run, newest first. */
export function listReviews(db: Db, runId: number): ReviewRow[] {
  return db
    .select({
      id: reviews.id,
      runId: reviews.runId,
      decision: reviews.decision,
      comment: reviews.comment,
      reviewerUserId: reviews.reviewerUserId,
      reviewerName: users.name,
      at: reviews.at,
    })
    .from(reviews)
    .innerJoin(users, eq(users.id, reviews.reviewerUserId))
    .where(eq(reviews.runId, runId))
    .orderBy(desc(reviews.id))
    .all();
}

/**
 * Records a review. Only finished runs can be reviewed (a running run has no result yet);
 * a run sent back needs a comment saying why.
 */
export function addReview(
  db: Db,
  input: { runId: number; reviewerUserId: number; decision: ReviewDecision; comment: string },
): ReviewRow {
  const run = db.select({ id: runs.id, status: runs.status }).from(runs).where(eq(runs.id, input.runId)).get();
  if (!run) throw new RecordError("not-found", `No run with id ${input.runId}.`, "runId");
  if (run.status !== "succeeded" && run.status !== "failed") {
    throw new RecordError("conflict", `Run ${input.runId} is ${run.status}; only finished runs can be reviewed.`);
  }
  if (input.decision === "approved" && run.status !== "succeeded") {
    throw new RecordError("conflict", `Run ${input.runId} failed; a failed run can be sent back but not approved.`, "decision");
  }
  const comment = input.comment.trim();
  if (input.decision === "returned" && comment.length === 0) {
    throw new RecordError("bad-input", "Say what needs changing when sending a run back.", "comment");
  }
  const row = db
    .insert(reviews)
    .values({ runId: input.runId, reviewerUserId: input.reviewerUserId, decision: input.decision, comment, at: new Date() })
    .returning()
    .get();
  const recorded = listReviews(db, input.runId).find((r) => r.id === row.id)!;
  // Whoever started the run hears of the decision (db/queries/notices.ts; the sender mails it).
  queueReviewDecisionNotice(db, input.runId, { decision: recorded.decision, reviewer: recorded.reviewerName, comment: recorded.comment });
  return recorded;
}
