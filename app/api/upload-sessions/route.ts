import { NextResponse } from "next/server";
import { z } from "zod";
import { getDb } from "@/db/client";
import { answerChange, parseOr400 } from "@/app/lib/api";
import { requirePermission, webActor } from "@/app/lib/session";
import { openUpload } from "@/pipeline/uploads";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

const openSchema = z.object({ profileId: z.number().int().positive() });

/** POST /api/upload-sessions: open an upload on a profile; files are then sent to /api/uploads with its id. */
export async function POST(req: Request) {
  return answerChange(req, async (json) => {
    const user = await requirePermission("uploads.send");
    const body = parseOr400(openSchema, json, "body");
    const session = openUpload(getDb(), body.profileId, webActor(user));
    return NextResponse.json({ sessionId: session.id }, { status: 201 });
  });
}
