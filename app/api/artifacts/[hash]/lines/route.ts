import { NextResponse } from "next/server";
import { z } from "zod";
import { answer, parseOr400 } from "@/app/lib/api";
import { gatherLines } from "@/app/lib/artifacts";
import { requirePermission } from "@/app/lib/session";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

const querySchema = z.object({ gather: z.string().min(1).max(200) });

/** GET /api/artifacts/:hash/lines?gather=: picks or mute lines of one gather, for drawing over traces. */
export async function GET(req: Request, ctx: { params: Promise<{ hash: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    const q = parseOr400(querySchema, Object.fromEntries(new URL(req.url).searchParams), "query");
    return NextResponse.json(await gatherLines((await ctx.params).hash, q.gather));
  });
}
