import type { Metadata } from "next";
import { getDb } from "@/db/client";
import { listDatasets } from "@/db/queries/datasets";
import { listPipelineVersions } from "@/db/queries/pipelines";
import { listSurveys } from "@/db/queries/surveys";
import { pageUserWith } from "@/app/lib/page-user";
import { StartRunForm } from "@/app/ui/runs/start-run-form";

export const metadata: Metadata = { title: "Start a run" };
export const dynamic = "force-dynamic";

export default async function StartRunPage({ searchParams }: { searchParams: Promise<{ version?: string }> }) {
  await pageUserWith("runs.start");
  const wanted = Number((await searchParams).version);
  const db = getDb();
  const surveys = listSurveys(db).map((s) => ({ id: s.id, name: s.name }));
  const datasets = listDatasets(db).map((d) => ({ id: d.id, surveyId: d.surveyId, name: d.name, fileCount: d.fileCount, contentHash: d.contentHash, createdAt: d.createdAt.getTime() }));
  const versions = listPipelineVersions(db).map((v) => ({ id: v.id, name: v.name, version: v.version, surveyId: v.surveyId, createdBy: v.createdByLabel, createdAt: v.createdAt.getTime() }));
  return (
    <div className="mx-auto max-w-3xl space-y-4">
      <div>
        <h1>Start a run</h1>
        <p className="text-ink-soft">Choose the field data and the pipeline version. The engine runs it in the background on the server&apos;s worker pool; the run page follows it live.</p>
      </div>
      <StartRunForm surveys={surveys} datasets={datasets} versions={versions} initialVersionId={versions.some((v) => v.id === wanted) ? wanted : undefined} />
    </div>
  );
}
