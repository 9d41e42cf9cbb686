import type { Metadata } from "next";
import Link from "next/link";
import { notFound } from "next/navigation";
import { idSchema } from "@/app/lib/api";
import { pageUserWith } from "@/app/lib/page-user";
import { can } from "@/app/lib/permissions";
import { readParamDocs, readRun } from "@/app/lib/reads";
import { RunLive } from "@/app/ui/run/run-live";
import { readRunShotTasks } from "@/app/lib/queue-reads";
import { ShotTaskTable } from "@/app/ui/queue/shot-task-table";

export const dynamic = "force-dynamic";

export async function generateMetadata({ params }: { params: Promise<{ runId: string }> }): Promise<Metadata> {
  return { title: `Run ${(await params).runId}` };
}

export default async function RunPage({ params, searchParams }: { params: Promise<{ runId: string }>; searchParams: Promise<{ step?: string }> }) {
  const user = await pageUserWith("runs.read");
  const id = idSchema.safeParse((await params).runId);
  if (!id.success) notFound();
  const run = readRun(id.data);
  if (!run) notFound();
  const { step } = await searchParams;
  // With a job queue, the run's shot tasks (by step, batch and shot) below the run.
  const tasks = await readRunShotTasks(run.id);
  return (
    <div className="space-y-6">
      <RunLive
        initial={run}
        initialStep={step}
        paramDocs={readParamDocs(run.steps.map((s) => s.stepId))}
        can={{ rerun: can(user.role, "runs.rerun"), cancel: can(user.role, "runs.cancel"), review: can(user.role, "runs.review"), auditExport: can(user.role, "audit.read"), reproduce: can(user.role, "runs.reproduce") }}
      />
      {run.status === "succeeded" ? (
        <p className="mt-4 text-sm">
          <Link href={`/runs/${run.id}/report`} className="underline" data-testid="client-report-link">
            Client report: interpretation, print-friendly page and PDF
          </Link>
        </p>
      ) : null}
      {tasks.state === "ok" && tasks.value.length > 0 && <ShotTaskTable rows={tasks.value} />}
    </div>
  );
}
