import { answer } from "@/app/lib/api";
import { binaryResponse } from "@/app/lib/binary";
import { fieldWire } from "@/app/lib/field-wire";
import { requirePermission } from "@/app/lib/session";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/** GET /api/artifacts/:hash/field: a model (Vs, Vp, density) or an inversion gradient as binary float32 grids. */
export async function GET(_req: Request, ctx: { params: Promise<{ hash: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    return binaryResponse(await fieldWire((await ctx.params).hash));
  });
}
