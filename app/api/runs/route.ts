import { NextResponse } from "next/server";
import { z } from "zod";
import { getDb } from "@/db/client";
import { answer, answerChange, parseOr400 } from "@/app/lib/api";
import { readRunList } from "@/app/lib/reads";
import { runFilterSchema, toDbFilter } from "@/app/lib/run-filter";
import { requirePermission, webActor } from "@/app/lib/session";
import { launchInBackground } from "@/pipeline/launch";
import { createRun } from "@/pipeline/run-create";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/** GET /api/runs: a page of runs, filtered and sorted server-side. */
export async function GET(req: Request) {
  return answer(async () => {
    await requirePermission("runs.read");
    const params = parseOr400(runFilterSchema, Object.fromEntries(new URL(req.url).searchParams), "query");
    return NextResponse.json(readRunList(toDbFilter(params)));
  });
}

const startSchema = z.object({
  pipelineVersionId: z.number().int().positive(),
  datasetId: z.number().int().positive(),
});

/** POST /api/runs: queue a run and hand it to the engine in the background; answers 202 at once. */
export async function POST(req: Request) {
  return answerChange(req, async (json) => {
    const user = await requirePermission("runs.start");
    const body = parseOr400(startSchema, json, "body");
    const { runId } = createRun(getDb(), { source: "pipeline-version", ...body, actor: webActor(user) });
    launchInBackground(runId);
    return NextResponse.json({ runId }, { status: 202 });
  });
}
