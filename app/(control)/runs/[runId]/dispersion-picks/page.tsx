import type { Metadata } from "next";
import Link from "next/link";
import { notFound } from "next/navigation";
import { idSchema } from "@/app/lib/api";
import { pageUserWith } from "@/app/lib/page-user";
import { can } from "@/app/lib/permissions";
import { readRun } from "@/app/lib/reads";
import { DispersionEditor } from "@/app/ui/picks/dispersion-editor";
import { dispersionImageParams } from "@/pipeline/steps/dispersion-image";

export const dynamic = "force-dynamic";
export const metadata: Metadata = { title: "Dispersion image and picks" };

/**
 * A run's dispersion images with their picks (runs.read), and for those who may rerun
 * (runs.rerun) the hand-pick editor; saving reruns from the dispersion-image step.
 */
export default async function DispersionPickPage({ params, searchParams }: { params: Promise<{ runId: string }>; searchParams: Promise<{ step?: string }> }) {
  const user = await pageUserWith("runs.read");
  const canEdit = can(user.role, "runs.rerun");
  const id = idSchema.safeParse((await params).runId);
  if (!id.success) notFound();
  const run = readRun(id.data);
  if (!run) notFound();
  const { step: wanted } = await searchParams;
  const candidates = run.steps.filter((s) => s.stepId === "dispersion-image");
  const step = candidates.find((s) => s.label === wanted) ?? candidates[0];
  const hash = step?.outputs.dispersion;
  const settings = step ? dispersionImageParams.safeParse(step.params) : null;
  return (
    <div className="space-y-4">
      <div>
        <p className="text-xs muted"><Link href="/runs" className="hover:underline">Runs</Link> / <Link href={`/runs/${run.id}${step ? `?step=${encodeURIComponent(step.label)}` : ""}`} className="hover:underline">Run {run.id}</Link> /</p>
        <h1>{canEdit ? "Edit dispersion picks" : "Dispersion image and picks"}</h1>
        <p className="text-ink-soft">
          {run.pipelineName} v{run.pipelineVersion} on {run.datasetName}{step ? `, step ${step.label}` : ""}. Hand-picked curves are saved as settings of the dispersion step in a new run; a window&apos;s hand pick of the fundamental mode replaces its automatic pick in the inversion for Vs, and every later step is recomputed.
        </p>
      </div>
      {!step ? (
        <p className="muted">This run has no dispersion-image step.</p>
      ) : step.status !== "succeeded" || !hash || !settings?.success ? (
        <p className="muted">The step {step.label} has no dispersion image to pick on (it is {step.status}).</p>
      ) : (
        <DispersionEditor runId={run.id} label={step.label} dispersionHash={hash} savedHandPicks={settings.data.handPicks} frequencyStepHz={settings.data.frequencyStepHz} canEdit={canEdit} />
      )}
    </div>
  );
}
