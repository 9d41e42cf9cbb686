import { NextResponse } from "next/server";
import { answer } from "@/app/lib/api";
import { artifactOutline } from "@/app/lib/artifacts";
import { requirePermission } from "@/app/lib/session";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/** GET /api/artifacts/:hash: what the artifact holds (gather list, model grid, ...), no samples. */
export async function GET(_req: Request, ctx: { params: Promise<{ hash: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    return NextResponse.json(await artifactOutline((await ctx.params).hash));
  });
}
