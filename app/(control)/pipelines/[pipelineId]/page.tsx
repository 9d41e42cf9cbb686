import type { Metadata } from "next";
import Link from "next/link";
import { notFound } from "next/navigation";
import { getDb } from "@/db/client";
import { getPipeline, listVersionsOfPipeline } from "@/db/queries/pipelines";
import { idSchema } from "@/app/lib/api";
import { pageUserWith } from "@/app/lib/page-user";
import { can } from "@/app/lib/permissions";
import { diffPipelines, editorModel, pipelineYaml, versionDefinition } from "@/pipeline/pipeline-edit";
import { formatTime } from "@/app/ui/format";
import { PipelineDiffView } from "@/app/ui/pipelines/pipeline-diff";

export const metadata: Metadata = { title: "Pipeline" };
export const dynamic = "force-dynamic";

export default async function PipelinePage({ params, searchParams }: { params: Promise<{ pipelineId: string }>; searchParams: Promise<{ from?: string; to?: string }> }) {
  const user = await pageUserWith("runs.read");
  const id = idSchema.safeParse((await params).pipelineId);
  if (!id.success) notFound();
  const db = getDb();
  const pipeline = getPipeline(db, id.data);
  if (!pipeline) notFound();
  const versions = listVersionsOfPipeline(db, pipeline.id);
  if (versions.length === 0) notFound();
  const sp = await searchParams;
  const pick = (raw: string | undefined, fallback: (typeof versions)[number]) => {
    const n = idSchema.safeParse(raw);
    return (n.success ? versions.find((v) => v.id === n.data) : undefined) ?? fallback;
  };
  const to = pick(sp.to, versions[0]);
  const from = pick(sp.from, versions[Math.min(1, versions.length - 1)]);
  const diff = from.id !== to.id ? diffPipelines(versionDefinition(from), versionDefinition(to)) : null;
  const yaml = pipelineYaml(editorModel(versionDefinition(to)));
  const mayEdit = can(user.role, "pipelines.edit");
  const mayStart = can(user.role, "runs.start");

  return (
    <div className="space-y-5">
      <div className="flex flex-wrap items-end gap-3">
        <div>
          <p className="text-xs muted"><Link href="/pipelines" className="hover:underline">Pipelines</Link> /</p>
          <h1>{pipeline.name}</h1>
          <p className="text-ink-soft">{versionDefinition(versions[0]).description || "No description."}</p>
        </div>
        {mayEdit ? <Link href={`/pipelines/${pipeline.id}/edit`} className="btn-primary ml-auto" data-testid="edit-pipeline">Edit (makes version {versions[0].version + 1})</Link> : null}
      </div>

      <section className="card overflow-x-auto">
        <h2 className="px-4 pt-3 text-base">Versions</h2>
        <table className="mt-2 w-full text-sm" data-testid="versions-table">
          <thead className="text-left text-xs muted">
            <tr>
              <th className="px-3 py-2">Version</th>
              <th className="px-3 py-2">Saved by</th>
              <th className="px-3 py-2">When</th>
              <th className="px-3 py-2">From</th>
              <th className="px-3 py-2">Steps</th>
              <th className="px-3 py-2"></th>
            </tr>
          </thead>
          <tbody>
            {versions.map((v) => (
              <tr key={v.id} className="border-t border-line" data-testid={`version-row-${v.version}`}>
                <td className="px-3 py-2 font-semibold">v{v.version}</td>
                <td className="px-3 py-2">{v.createdByLabel}</td>
                <td className="px-3 py-2">{formatTime(v.createdAt.getTime())}</td>
                <td className="px-3 py-2 break-all text-xs">{v.sourcePath ? <span title={v.sourcePath}>file {v.sourcePath.split("/").pop()}</span> : "editor"}</td>
                <td className="px-3 py-2">{versionDefinition(v).steps.length}</td>
                <td className="px-3 py-2 text-right whitespace-nowrap">
                  <a href={`/api/pipeline-versions/${v.id}/yaml`} className="btn px-2 py-0.5 text-xs" data-testid={`download-yaml-${v.version}`}>YAML</a>
                  {mayStart ? <Link href={`/runs/new?version=${v.id}`} className="btn ml-1 px-2 py-0.5 text-xs" data-testid={`run-version-${v.version}`}>Run this version on a dataset</Link> : null}
                </td>
              </tr>
            ))}
          </tbody>
        </table>
      </section>

      <section className="card space-y-3 p-4" data-testid="version-diff">
        <form className="flex flex-wrap items-end gap-3" method="get" aria-label="Choose versions to compare">
          <h2 className="mr-2 text-base">Differences</h2>
          <div>
            <label className="label" htmlFor="diff-from">From</label>
            <select id="diff-from" name="from" defaultValue={String(from.id)} className="field mt-1 w-auto">
              {versions.map((v) => <option key={v.id} value={v.id}>v{v.version} · {v.createdByLabel}</option>)}
            </select>
          </div>
          <div>
            <label className="label" htmlFor="diff-to">To</label>
            <select id="diff-to" name="to" defaultValue={String(to.id)} className="field mt-1 w-auto">
              {versions.map((v) => <option key={v.id} value={v.id}>v{v.version} · {v.createdByLabel}</option>)}
            </select>
          </div>
          <button type="submit" className="btn" data-testid="diff-compare">Compare</button>
        </form>
        {diff ? <PipelineDiffView diff={diff} fromVersion={from.version} toVersion={to.version} /> : <p className="text-sm muted">{versions.length === 1 ? "There is one version so far." : "Choose two different versions."}</p>}
      </section>

      <section className="card p-4">
        <div className="flex items-center gap-3">
          <h2 className="text-base">Pipeline file of v{to.version}</h2>
          <a href={`/api/pipeline-versions/${to.id}/yaml`} className="btn ml-auto px-2 py-0.5 text-xs">Download</a>
        </div>
        <p className="mt-1 text-xs muted">
          What the command line reads: <code>tracewright run {pipeline.name}-v{to.version}.yaml --field-data &lt;folder&gt;</code>. Complete settings; paths as recorded.
        </p>
        <pre className="mt-2 max-h-[32rem] overflow-auto rounded-md bg-panel p-3 font-mono text-xs" data-testid="pipeline-yaml">{yaml}</pre>
      </section>
    </div>
  );
}
