import type { Metadata } from "next";
import Link from "next/link";
import { notFound } from "next/navigation";
import { idSchema } from "@/app/lib/api";
import { pageUserWith } from "@/app/lib/page-user";
import { readRun } from "@/app/lib/reads";
import { describeParams, getStep } from "@/pipeline/registry";
import type { ParamDoc } from "@/pipeline/registry";
import { RerunForm } from "@/app/ui/rerun/rerun-form";

export const dynamic = "force-dynamic";
export const metadata: Metadata = { title: "Rerun with changed settings" };

export default async function RerunPage({ params, searchParams }: { params: Promise<{ runId: string }>; searchParams: Promise<{ from?: string }> }) {
  await pageUserWith("runs.rerun");
  const id = idSchema.safeParse((await params).runId);
  if (!id.success) notFound();
  const run = readRun(id.data);
  if (!run) notFound();
  const { from } = await searchParams;
  const steps = run.steps.map((s) => {
    let docs: ParamDoc[] = [];
    let missing: string | null = null;
    try {
      docs = describeParams(getStep(s.stepId));
    } catch (err) {
      missing = err instanceof Error ? err.message : String(err);
    }
    return { label: s.label, stepId: s.stepId, params: s.params, docs, missing };
  });
  const fromLabel = steps.some((s) => s.label === from) ? from! : steps[0]?.label;
  return (
    <div className="mx-auto max-w-4xl space-y-4">
      <div>
        <p className="text-xs muted"><Link href="/runs" className="hover:underline">Runs</Link> / <Link href={`/runs/${run.id}`} className="hover:underline">Run {run.id}</Link> /</p>
        <h1>Rerun with changed settings</h1>
        <p className="text-ink-soft">
          A new run of {run.pipelineName} v{run.pipelineVersion} on {run.datasetName}. Steps before the one you start from keep their results; so does any later step whose settings and inputs come out the same.
        </p>
      </div>
      {fromLabel ? <RerunForm runId={run.id} steps={steps} initialFrom={fromLabel} /> : <p className="muted">This run has no steps to rerun.</p>}
    </div>
  );
}
