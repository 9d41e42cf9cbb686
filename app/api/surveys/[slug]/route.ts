import { NextResponse } from "next/server";
import { getDb } from "@/db/client";
import { getSurveyDetail } from "@/db/queries/surveys";
import { AppError } from "@/pipeline/errors";
import { answer } from "@/app/lib/api";
import { requirePermission } from "@/app/lib/session";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/** GET /api/surveys/:slug: the survey with its people, profiles (and latest approved model each), datasets and latest runs. */
export async function GET(_req: Request, ctx: { params: Promise<{ slug: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    const { slug } = await ctx.params;
    const detail = getSurveyDetail(getDb(), slug);
    if (!detail) throw new AppError("not-found", `No survey "${slug}".`, { field: "slug" });
    return NextResponse.json(detail);
  });
}
