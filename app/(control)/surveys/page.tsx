import type { Metadata } from "next";
import Link from "next/link";
import { getDb } from "@/db/client";
import { listSurveys } from "@/db/queries/surveys";
import { pageUserWith } from "@/app/lib/page-user";
import { can } from "@/app/lib/permissions";
import { RecordForm } from "@/app/ui/surveys/record-form";

export const metadata: Metadata = { title: "Surveys" };
export const dynamic = "force-dynamic";

/** The surveys, searchable by name, client, site and purpose; a form to create one for those who may. */
export default async function SurveysPage({ searchParams }: { searchParams: Promise<{ q?: string }> }) {
  const user = await pageUserWith("runs.read");
  const q = (await searchParams).q?.slice(0, 200) ?? "";
  const rows = listSurveys(getDb(), q);
  const mayEdit = can(user.role, "surveys.edit");
  return (
    <div className="space-y-6">
      <div>
        <h1>Surveys</h1>
        <p className="text-ink-soft">Each survey with its client, site and profiles. Pipeline files name a survey by its short name; one that does not exist yet is created at the run and appears here.</p>
      </div>
      <div className={mayEdit ? "grid gap-6 lg:grid-cols-[1fr_420px]" : ""}>
        <section className="card overflow-hidden" aria-label="Survey list">
          <form className="flex gap-2 border-b border-line p-3" role="search">
            <label htmlFor="survey-search" className="sr-only">Search surveys</label>
            <input id="survey-search" name="q" defaultValue={q} placeholder="Search by name, client, site or purpose" className="field" />
            <button type="submit" className="btn">Search</button>
          </form>
          {rows.length === 0 ? (
            <p className="px-4 py-3 text-sm muted" data-testid="surveys-empty">{q ? `No survey matches "${q}".` : "No surveys yet."}</p>
          ) : (
            <table className="w-full text-sm" data-testid="surveys-table">
              <thead className="bg-ground text-left text-xs text-ink-soft">
                <tr>
                  <th className="px-4 py-2 font-medium">Survey</th>
                  <th className="px-4 py-2 font-medium">Client</th>
                  <th className="px-4 py-2 font-medium">Site</th>
                  <th className="px-4 py-2 font-medium">Dates</th>
                  <th className="px-4 py-2 font-medium">Profiles</th>
                  <th className="px-4 py-2 font-medium">Runs</th>
                </tr>
              </thead>
              <tbody>
                {rows.map((s) => (
                  <tr key={s.id} className="border-t border-line" data-testid={`survey-row-${s.slug}`}>
                    <td className="px-4 py-2">
                      <Link href={`/surveys/${s.slug}`} className="font-medium text-accent hover:underline">{s.name}</Link>
                      <div className="text-xs muted">{s.slug}</div>
                    </td>
                    <td className="px-4 py-2">{s.client || "—"}</td>
                    <td className="px-4 py-2">{s.site || "—"}</td>
                    <td className="px-4 py-2 text-ink-soft">{s.startDate || s.endDate ? `${s.startDate || "?"} to ${s.endDate || "?"}` : "—"}</td>
                    <td className="px-4 py-2">{s.profileCount}</td>
                    <td className="px-4 py-2">{s.runCount}</td>
                  </tr>
                ))}
              </tbody>
            </table>
          )}
        </section>
        {mayEdit ? (
          <section className="card p-4" aria-label="New survey">
            <h2 className="mb-3">New survey</h2>
            <RecordForm kind="survey-new" />
          </section>
        ) : null}
      </div>
    </div>
  );
}
