import type { Metadata } from "next";
import Link from "next/link";
import { getDb } from "@/db/client";
import { listPipelineVersions } from "@/db/queries/pipelines";
import { listSurveys } from "@/db/queries/surveys";
import { listUsers } from "@/db/queries/users";
import { pageUserWith } from "@/app/lib/page-user";
import { can } from "@/app/lib/permissions";
import { readRunList } from "@/app/lib/reads";
import { filterToQuery, runFilterSchema, toDbFilter } from "@/app/lib/run-filter";
import { RunsTable } from "@/app/ui/runs/runs-table";

export const metadata: Metadata = { title: "Runs" };
export const dynamic = "force-dynamic";

export default async function RunsPage({ searchParams }: { searchParams: Promise<Record<string, string | string[] | undefined>> }) {
  const user = await pageUserWith("runs.read");
  const raw = Object.fromEntries(Object.entries(await searchParams).map(([k, v]) => [k, Array.isArray(v) ? v[0] : v]));
  const parsed = runFilterSchema.safeParse(raw);
  const filter = parsed.success ? parsed.data : runFilterSchema.parse({});
  const problem = parsed.success ? null : parsed.error.issues.map((i) => `${i.path.join(".")}: ${i.message}`).join("; ");
  const db = getDb();
  const initial = readRunList(toDbFilter(filter));
  const options = {
    surveys: listSurveys(db).map((s) => ({ value: s.slug, label: s.name })),
    pipelines: [...new Set(listPipelineVersions(db).map((p) => p.name))],
    people: listUsers(db).map((u) => u.name),
  };
  return (
    <div className="space-y-4">
      <div className="flex items-end justify-between gap-4">
        <div>
          <h1>Runs</h1>
          <p className="text-ink-soft">Every pipeline run, from the command line, the control room or a watched folder.</p>
        </div>
        {can(user.role, "runs.start") ? (
          <Link href="/runs/new" className="btn-primary">Start a run</Link>
        ) : null}
      </div>
      {problem ? <p role="alert" className="rounded-md bg-warn-soft px-3 py-2 text-sm text-warn">Filter ignored: {problem}</p> : null}
      <RunsTable filter={filter} query={filterToQuery(filter)} initial={initial} options={options} />
    </div>
  );
}
