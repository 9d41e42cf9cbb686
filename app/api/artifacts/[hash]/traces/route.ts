import { z } from "zod";
import { answer, parseOr400 } from "@/app/lib/api";
import { gatherWire } from "@/app/lib/artifacts";
import { binaryResponse } from "@/app/lib/binary";
import { requirePermission } from "@/app/lib/session";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

const querySchema = z.object({
  gather: z.string().min(1).max(200).optional(),
  /** Decimate in time (peak-preserving) to at most this many samples per trace, for overviews. */
  maxSamples: z.coerce.number().int().min(16).max(1_000_000).optional(),
});

/** GET /api/artifacts/:hash/traces?gather=&maxSamples=: one gather as binary float32 (app/lib/trace-wire.ts). */
export async function GET(req: Request, ctx: { params: Promise<{ hash: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    const q = parseOr400(querySchema, Object.fromEntries(new URL(req.url).searchParams), "query");
    return binaryResponse(await gatherWire((await ctx.params).hash, q.gather, q.maxSamples));
  });
}
