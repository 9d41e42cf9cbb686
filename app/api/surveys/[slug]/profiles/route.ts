import { NextResponse } from "next/server";
import { getDb } from "@/db/client";
import { addProfile } from "@/db/queries/surveys";
import { profileFields } from "@/db/survey-fields";
import { answerChange, parseOr400 } from "@/app/lib/api";
import { requirePermission, webActor } from "@/app/lib/session";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/**
 * POST /api/surveys/:slug/profiles: adds a profile (line name, orientationDeg, spreadDescription,
 * crs as "EPSG:nnnn", startX/startY/endX/endY in that reference); audited.
 */
export async function POST(req: Request, ctx: { params: Promise<{ slug: string }> }) {
  return answerChange(req, async (json) => {
    const user = await requirePermission("surveys.edit");
    const { slug } = await ctx.params;
    const body = parseOr400(profileFields, json, "body");
    const profile = addProfile(getDb(), slug, body, webActor(user));
    return NextResponse.json({ profile }, { status: 201 });
  });
}
