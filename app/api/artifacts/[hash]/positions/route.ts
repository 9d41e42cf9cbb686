import { NextResponse } from "next/server";
import { answer } from "@/app/lib/api";
import { acquisitionPositions } from "@/app/lib/artifacts";
import { requirePermission } from "@/app/lib/session";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/** GET /api/artifacts/:hash/positions: receiver and source x of a gathers artifact (to mark a model). */
export async function GET(_req: Request, ctx: { params: Promise<{ hash: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    return NextResponse.json(await acquisitionPositions((await ctx.params).hash));
  });
}
