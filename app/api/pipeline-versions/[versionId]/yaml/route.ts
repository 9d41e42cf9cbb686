import { getDb } from "@/db/client";
import { getPipelineVersion } from "@/db/queries/pipelines";
import { answer, parseId } from "@/app/lib/api";
import { requirePermission } from "@/app/lib/session";
import { AppError } from "@/pipeline/errors";
import { editorModel, pipelineYaml, versionDefinition } from "@/pipeline/pipeline-edit";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/**
 * GET /api/pipeline-versions/:versionId/yaml: the pipeline file of a recorded version, as the
 * command line reads it (`tracewright run <file> --field-data <folder>`), with complete settings
 * and absolute paths.
 */
export async function GET(_req: Request, ctx: { params: Promise<{ versionId: string }> }) {
  return answer(async () => {
    await requirePermission("runs.read");
    const id = parseId((await ctx.params).versionId, "versionId");
    const pv = getPipelineVersion(getDb(), id);
    if (!pv) throw new AppError("not-found", `No pipeline version with id ${id}.`, { field: "versionId" });
    const text = pipelineYaml(editorModel(versionDefinition(pv.version)));
    return new Response(text, {
      headers: {
        "content-type": "application/yaml; charset=utf-8",
        "content-disposition": `attachment; filename="${pv.pipeline.name}-v${pv.version.version}.yaml"`,
        "cache-control": "private, no-store",
      },
    });
  });
}
