import { z } from "zod";
import { answer, parseOr400 } from "@/app/lib/api";
import { snapshotWire } from "@/app/lib/artifacts";
import { binaryResponse } from "@/app/lib/binary";
import { requirePermission } from "@/app/lib/session";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

const querySchema = z.object({ frame: z.coerce.number().int().min(0).default(0) });

/** GET /api/artifacts/:hash/snapshots?frame=: one wavefield frame as binary float32. */
export async function GET(req: Request, ctx: { params: Promise<{ hash: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    const q = parseOr400(querySchema, Object.fromEntries(new URL(req.url).searchParams), "query");
    return binaryResponse(await snapshotWire((await ctx.params).hash, q.frame));
  });
}
