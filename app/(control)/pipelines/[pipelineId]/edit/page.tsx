import type { Metadata } from "next";
import Link from "next/link";
import { notFound } from "next/navigation";
import { getDb } from "@/db/client";
import { getPipeline, listVersionsOfPipeline } from "@/db/queries/pipelines";
import { idSchema } from "@/app/lib/api";
import { pageUserWith } from "@/app/lib/page-user";
import { describeParams, listSteps } from "@/pipeline/registry";
import { editorModel, stepCatalogue, versionDefinition } from "@/pipeline/pipeline-edit";
import { PipelineEditor } from "@/app/ui/pipelines/pipeline-editor";

export const metadata: Metadata = { title: "Edit pipeline" };
export const dynamic = "force-dynamic";

export default async function EditPipelinePage({ params }: { params: Promise<{ pipelineId: string }> }) {
  await pageUserWith("pipelines.edit");
  const id = idSchema.safeParse((await params).pipelineId);
  if (!id.success) notFound();
  const db = getDb();
  const pipeline = getPipeline(db, id.data);
  if (!pipeline) notFound();
  const latest = listVersionsOfPipeline(db, pipeline.id)[0];
  if (!latest) notFound();
  const model = editorModel(versionDefinition(latest));
  const docs = Object.fromEntries(listSteps().map((s) => [s.id, describeParams(s)]));
  return (
    <div className="mx-auto max-w-5xl space-y-4">
      <div>
        <p className="text-xs muted"><Link href="/pipelines" className="hover:underline">Pipelines</Link> / <Link href={`/pipelines/${pipeline.id}`} className="hover:underline">{pipeline.name}</Link> /</p>
        <h1>Edit {pipeline.name}</h1>
        <p className="text-ink-soft">Open a step to change its settings. The server checks the pipeline exactly as the command line checks a pipeline file before it saves.</p>
      </div>
      <PipelineEditor
        pipelineId={pipeline.id}
        baseVersionId={latest.id}
        baseVersion={latest.version}
        name={pipeline.name}
        fieldData={model.fieldData}
        geometryTable={model.geometryTable}
        initial={{ description: model.description, onBadFile: model.onBadFile, steps: model.steps }}
        docs={docs}
        catalogue={stepCatalogue()}
      />
    </div>
  );
}
