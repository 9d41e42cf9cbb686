/**
 * Recording a lead's decision once: a second identical decision on a run (approving a run whose
 * latest decision is already an approval, or sending it back again with the same comment) is
 * refused, so a double click or a resent request cannot leave duplicate approvals. Call inside
 * a write transaction (BEGIN IMMEDIATE) so two requests cannot both see "no decision yet".
 */
import { asc, desc, eq, inArray } from "drizzle-orm";
import type { Db } from "../client";
import { reviews, users } from "../schema";
import { RecordError } from "../errors";
import { addReview, type ReviewDecision, type ReviewRow } from "./reviews";

/** The latest decision on a run, or null. */
export function latestDecision(db: Db, runId: number): { decision: ReviewDecision; comment: string } | null {
  return (
    db.select({ decision: reviews.decision, comment: reviews.comment }).from(reviews).where(eq(reviews.runId, runId)).orderBy(desc(reviews.id)).limit(1).get() ??
    null
  );
}

/** Adds a review unless it repeats the run's latest decision (RecordError "conflict", which the doors answer as a conflict). */
export function addReviewOnce(db: Db, input: { runId: number; reviewerUserId: number; decision: ReviewDecision; comment: string }): ReviewRow {
  const last = latestDecision(db, input.runId);
  if (last && last.decision === input.decision && (input.decision === "approved" || last.comment === input.comment.trim())) {
    throw new RecordError(
      "conflict",
      input.decision === "approved" ? `Run ${input.runId} is already approved.` : `Run ${input.runId} was already sent back with this comment.`,
      "decision",
    );
  }
  return addReview(db, input);
}

/** The latest decision on each of `runIds` (runs with none are absent), with the reviewer's name. */
export function latestDecisions(db: Db, runIds: number[]): Map<number, { decision: ReviewDecision; reviewer: string; at: Date }> {
  const out = new Map<number, { decision: ReviewDecision; reviewer: string; at: Date }>();
  if (runIds.length === 0) return out;
  const rows = db
    .select({ runId: reviews.runId, id: reviews.id, decision: reviews.decision, reviewer: users.name, at: reviews.at })
    .from(reviews)
    .innerJoin(users, eq(users.id, reviews.reviewerUserId))
    .where(inArray(reviews.runId, runIds))
    .orderBy(asc(reviews.id))
    .all();
  for (const r of rows) out.set(r.runId, { decision: r.decision, reviewer: r.reviewer, at: r.at });
  return out;
}
