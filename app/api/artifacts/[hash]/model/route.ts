import { answer } from "@/app/lib/api";
import { modelWire } from "@/app/lib/artifacts";
import { binaryResponse } from "@/app/lib/binary";
import { requirePermission } from "@/app/lib/session";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/** GET /api/artifacts/:hash/model: Vs, Vp and density grids as binary float32. */
export async function GET(_req: Request, ctx: { params: Promise<{ hash: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    return binaryResponse(await modelWire((await ctx.params).hash));
  });
}
