"use server";

/**
 * A lead or auditor asks for a run to be reproduced: the request is recorded (with its audit
 * event) and handed to a detached `tracewright reproduce` process; the page follows its progress
 * and shows the verdict. The request returns at once.
 */
import { revalidatePath } from "next/cache";
import { z } from "zod";
import { getDb } from "@/db/client";
import { finishReproduction, insertReproduction } from "@/db/queries/reproductions";
import { getRunRecord } from "@/db/queries/run-records";
import { launchReproductionInBackground } from "@/pipeline/launch";
import { AppError } from "@/pipeline/errors";
import { requirePermission, webActor } from "../session";
import { errorState, type FormState } from "./form-state";

const requestSchema = z.object({ runId: z.coerce.number().int().positive() });

/** Starts the reproduction of a succeeded run in the background; answers form state. */
export async function startReproduction(input: { runId: number }): Promise<FormState> {
  try {
    const user = await requirePermission("runs.reproduce");
    const { runId } = requestSchema.parse(input);
    const db = getDb();
    const run = getRunRecord(db, runId);
    if (run.status !== "succeeded") throw new AppError("conflict", `Run ${runId} is ${run.status}; only a succeeded run can be reproduced.`, { field: "runId" });
    const actor = webActor(user);
    const reproductionId = insertReproduction(db, { runId, actor });
    launchReproductionInBackground(runId, reproductionId, (err) =>
      finishReproduction(getDb(), reproductionId, { verdict: "failed", details: null, error: `the reproduction process did not start: ${err.message}`, actor, runId }),
    );
    revalidatePath(`/runs/${runId}`);
    return { ok: `Reproduction ${reproductionId} started.` };
  } catch (err) {
    return errorState(err);
  }
}
