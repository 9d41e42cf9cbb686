import { NextResponse } from "next/server";
import { z } from "zod";
import { getDb } from "@/db/client";
import { answerChange, parseId, parseOr400 } from "@/app/lib/api";
import { requirePermission, webActor } from "@/app/lib/session";
import { launchInBackground } from "@/pipeline/launch";
import { createRun } from "@/pipeline/run-create";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

const rerunSchema = z.object({
  /** Label of the step the rerun starts from. */
  fromLabel: z.string().min(1).max(200),
  /** { "<step label>": { "<param>": value } }; validated against the step schemas by the engine. */
  overrides: z.record(z.string(), z.record(z.string(), z.unknown())).default({}),
});

/**
 * POST /api/runs/:runId/rerun: a new run from a step with changed parameters, through the
 * engine (pipeline/launch.ts), which validates the overrides; answers 202 with the new run id.
 */
export async function POST(req: Request, ctx: { params: Promise<{ runId: string }> }) {
  return answerChange(req, async (json) => {
    const user = await requirePermission("runs.rerun");
    const parentRunId = parseId((await ctx.params).runId, "runId");
    const body = parseOr400(rerunSchema, json, "body");
    const { runId } = createRun(getDb(), { source: "rerun", parentRunId, fromLabel: body.fromLabel, overrides: body.overrides, actor: webActor(user) });
    launchInBackground(runId);
    return NextResponse.json({ runId }, { status: 202 });
  });
}
