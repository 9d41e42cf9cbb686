import type { Metadata } from "next";
import Link from "next/link";
import { getDb } from "@/db/client";
import { listPipelines } from "@/db/queries/pipelines";
import { pageUserWith } from "@/app/lib/page-user";
import { formatTime } from "@/app/ui/format";

export const metadata: Metadata = { title: "Pipelines" };
export const dynamic = "force-dynamic";

export default async function PipelinesPage() {
  await pageUserWith("runs.read");
  const rows = listPipelines(getDb());
  return (
    <div className="space-y-4">
      <div>
        <h1>Pipelines</h1>
        <p className="text-ink-soft">Every pipeline with its versions. A saved change, from a pipeline file on the command line or from the editor here, is a new version; none is overwritten.</p>
      </div>
      <div className="card overflow-x-auto">
        <table className="w-full text-sm" data-testid="pipelines-table">
          <thead className="text-left text-xs muted">
            <tr>
              <th className="px-3 py-2">Pipeline</th>
              <th className="px-3 py-2">Survey</th>
              <th className="px-3 py-2">Newest version</th>
              <th className="px-3 py-2">Saved by</th>
              <th className="px-3 py-2">When</th>
              <th className="px-3 py-2">Versions</th>
            </tr>
          </thead>
          <tbody>
            {rows.map((p) => (
              <tr key={p.id} className="border-t border-line" data-testid={`pipeline-row-${p.name}`}>
                <td className="px-3 py-2"><Link href={`/pipelines/${p.id}`} className="font-semibold hover:underline">{p.name}</Link></td>
                <td className="px-3 py-2">{p.surveySlug ?? "—"}</td>
                <td className="px-3 py-2">v{p.latestVersion}</td>
                <td className="px-3 py-2">{p.latestBy}</td>
                <td className="px-3 py-2">{formatTime(p.latestAt.getTime())}</td>
                <td className="px-3 py-2">{p.versions}</td>
              </tr>
            ))}
            {rows.length === 0 ? (
              <tr><td colSpan={6} className="px-3 py-6 text-center muted">No pipelines yet: run a pipeline file with <code>tracewright run</code> to record one.</td></tr>
            ) : null}
          </tbody>
        </table>
      </div>
    </div>
  );
}
