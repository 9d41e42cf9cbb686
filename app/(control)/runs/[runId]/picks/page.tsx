import type { Metadata } from "next";
import Link from "next/link";
import { notFound } from "next/navigation";
import { idSchema } from "@/app/lib/api";
import { pageUserWith } from "@/app/lib/page-user";
import { readRun } from "@/app/lib/reads";
import { FirstArrivalEditor } from "@/app/ui/picks/first-arrival-editor";
import { firstArrivalsParams } from "@/pipeline/steps/first-arrivals";

export const dynamic = "force-dynamic";
export const metadata: Metadata = { title: "Edit first-arrival picks" };

/** Editing a run's first-arrival picks by hand; saving reruns from the picking step (runs.rerun). */
export default async function PickEditPage({ params, searchParams }: { params: Promise<{ runId: string }>; searchParams: Promise<{ step?: string }> }) {
  await pageUserWith("runs.rerun");
  const id = idSchema.safeParse((await params).runId);
  if (!id.success) notFound();
  const run = readRun(id.data);
  if (!run) notFound();
  const { step: wanted } = await searchParams;
  const candidates = run.steps.filter((s) => s.stepId === "first-arrivals");
  const step = candidates.find((s) => s.label === wanted) ?? candidates[0];
  const gathersHash = step?.inputs.gathers;
  const picksHash = step?.outputs.picks;
  const settings = step ? firstArrivalsParams.safeParse(step.params) : null;
  return (
    <div className="space-y-4">
      <div>
        <p className="text-xs muted"><Link href="/runs" className="hover:underline">Runs</Link> / <Link href={`/runs/${run.id}${step ? `?step=${encodeURIComponent(step.label)}` : ""}`} className="hover:underline">Run {run.id}</Link> /</p>
        <h1>Edit first-arrival picks</h1>
        <p className="text-ink-soft">
          {run.pipelineName} v{run.pipelineVersion} on {run.datasetName}{step ? `, step ${step.label}` : ""}. Your edits are saved as settings of the picking step in a new run, which recomputes the picks and every step after them (the tomography, the mute, …).
        </p>
      </div>
      {!step ? (
        <p className="muted">This run has no first-arrival picking step.</p>
      ) : step.status !== "succeeded" || !gathersHash || !picksHash || !settings?.success ? (
        <p className="muted">The step {step.label} has no picks to edit (it {step.status === "succeeded" ? "recorded no picks" : `is ${step.status}`}).</p>
      ) : (
        <FirstArrivalEditor runId={run.id} label={step.label} gathersHash={gathersHash} picksHash={picksHash} savedEdits={settings.data.pickEdits} />
      )}
    </div>
  );
}
