"use server";

/**
 * The lead's decision on a run as a server action: checks "runs.review" itself, refuses a
 * second identical decision (db/queries/review-decisions.ts) and records the audit event in the
 * same transaction.
 */
import { revalidatePath } from "next/cache";
import { z } from "zod";
import { getDb, writeTransaction } from "@/db/client";
import { recordAudit } from "@/db/queries/audit";
import { addReviewOnce } from "@/db/queries/review-decisions";
import { requirePermission, webActor } from "../session";
import { errorState, type FormState } from "./form-state";

const decisionSchema = z.object({
  runId: z.coerce.number().int().positive(),
  decision: z.enum(["approved", "returned"]),
  comment: z.string().max(4000).default(""),
});

/** Approve a run or send it back; answers form state (ok, or the reason it was refused). */
export async function decideRun(input: { runId: number; decision: "approved" | "returned"; comment: string }): Promise<FormState> {
  try {
    const user = await requirePermission("runs.review");
    const body = decisionSchema.parse(input);
    writeTransaction(getDb(), (tx) => {
      const r = addReviewOnce(tx, { runId: body.runId, reviewerUserId: user.id, decision: body.decision, comment: body.comment });
      recordAudit(tx, {
        actor: webActor(user),
        action: body.decision === "approved" ? "review.approve" : "review.return",
        entityType: "run",
        entityId: body.runId,
        after: { decision: r.decision, comment: r.comment },
      });
    });
    revalidatePath(`/runs/${body.runId}`);
    return { ok: body.decision === "approved" ? "Approved." : "Sent back." };
  } catch (err) {
    return errorState(err);
  }
}
