import { NextResponse } from "next/server";
import { answer, parseId } from "@/app/lib/api";
import { readUploadSession } from "@/app/lib/upload-reads";
import { requirePermission } from "@/app/lib/session";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/** GET /api/upload-sessions/:id: the upload, its files with their verdicts, and what it became. */
export async function GET(_req: Request, ctx: { params: Promise<{ sessionId: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    const id = parseId((await ctx.params).sessionId, "sessionId");
    return NextResponse.json(readUploadSession(id));
  });
}
