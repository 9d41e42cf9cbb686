import { NextResponse } from "next/server";
import { z } from "zod";
import { answer, parseOr400 } from "@/app/lib/api";
import { dispersionJson } from "@/app/lib/artifacts";
import { requirePermission } from "@/app/lib/session";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

const querySchema = z.object({ window: z.string().min(1).max(40).optional() });

/** GET /api/artifacts/:hash/dispersion?window=W01: one window's dispersion image with its picks, JSON. */
export async function GET(req: Request, ctx: { params: Promise<{ hash: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    const q = parseOr400(querySchema, Object.fromEntries(new URL(req.url).searchParams), "query");
    return NextResponse.json(await dispersionJson((await ctx.params).hash, q.window));
  });
}
