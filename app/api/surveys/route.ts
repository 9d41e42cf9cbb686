import { NextResponse } from "next/server";
import { getDb } from "@/db/client";
import { createSurvey, listSurveys } from "@/db/queries/surveys";
import { newSurvey } from "@/db/survey-fields";
import { answer, answerChange, parseOr400 } from "@/app/lib/api";
import { requirePermission, webActor } from "@/app/lib/session";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/** GET /api/surveys?q=: surveys by name, with profile and run counts; `q` searches name, short name, client, site and purpose. */
export async function GET(req: Request) {
  return answer(async () => {
    await requirePermission("runs.read");
    const q = new URL(req.url).searchParams.get("q")?.slice(0, 200) ?? "";
    return NextResponse.json({ surveys: listSurveys(getDb(), q) });
  });
}

/** POST /api/surveys: creates a survey (`slug`, `name`, optional client, site, purpose, startDate, endDate, notes); audited. */
export async function POST(req: Request) {
  return answerChange(req, async (json) => {
    const user = await requirePermission("surveys.edit");
    const body = parseOr400(newSurvey, json, "body");
    const survey = createSurvey(getDb(), body, webActor(user));
    return NextResponse.json({ survey }, { status: 201 });
  });
}
