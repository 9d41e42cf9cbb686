import type { Metadata } from "next";
import Link from "next/link";
import { notFound } from "next/navigation";
import { getDb } from "@/db/client";
import { getSurveyDetail } from "@/db/queries/surveys";
import { pageUserWith } from "@/app/lib/page-user";
import { can } from "@/app/lib/permissions";
import { formatTime } from "@/app/ui/format";
import { PersonForm } from "@/app/ui/surveys/person-form";
import { RecordForm } from "@/app/ui/surveys/record-form";
import { SurveyRuns, formatBytes, formatEnds } from "@/app/ui/surveys/survey-runs";

export const metadata: Metadata = { title: "Survey" };
export const dynamic = "force-dynamic";

/** One survey: its details, people, profiles (each with its latest approved model), datasets and runs. */
export default async function SurveyPage({ params }: { params: Promise<{ slug: string }> }) {
  const user = await pageUserWith("runs.read");
  const { slug } = await params;
  const detail = getSurveyDetail(getDb(), slug);
  if (!detail) notFound();
  const { survey, people, profiles, datasets, runs } = detail;
  const mayEdit = can(user.role, "surveys.edit");
  const facts: Array<[string, string]> = [
    ["Client", survey.client],
    ["Site", survey.site],
    ["Purpose", survey.purpose],
    ["In the field", survey.startDate || survey.endDate ? `${survey.startDate || "?"} to ${survey.endDate || "?"}` : ""],
    ["Notes", survey.notes],
    ["Description", survey.description],
  ];
  return (
    <div className="space-y-6">
      <div>
        <p className="text-sm"><Link href="/surveys" className="text-accent hover:underline">Surveys</Link> /</p>
        <h1 data-testid="survey-title">{survey.name}</h1>
        <p className="text-sm muted">Short name <code>{survey.slug}</code> · recorded {formatTime(survey.createdAt.getTime())}</p>
      </div>

      <section className="card p-4" aria-label="Details" data-testid="survey-details">
        <h2 className="mb-2">Details</h2>
        <dl className="grid gap-x-6 gap-y-2 text-sm sm:grid-cols-[10rem_1fr]">
          {facts.map(([k, v]) => (
            <div key={k} className="contents">
              <dt className="text-ink-soft">{k}</dt>
              <dd className="whitespace-pre-line">{v || "—"}</dd>
            </div>
          ))}
        </dl>
        {mayEdit ? (
          <details className="mt-4">
            <summary className="cursor-pointer text-sm text-accent">Change the details</summary>
            <div className="mt-3 max-w-2xl">
              <RecordForm
                kind="survey-edit"
                initial={{ slug: survey.slug, name: survey.name, client: survey.client, site: survey.site, purpose: survey.purpose, startDate: survey.startDate, endDate: survey.endDate, notes: survey.notes }}
              />
            </div>
          </details>
        ) : null}
      </section>

      <section className="card overflow-hidden" aria-label="Profiles">
        <h2 className="px-4 pt-4">Profiles</h2>
        {profiles.length === 0 ? (
          <p className="px-4 py-3 text-sm muted">No profiles yet.</p>
        ) : (
          <table className="mt-2 w-full text-sm" data-testid="survey-profiles">
            <thead className="bg-ground text-left text-xs text-ink-soft">
              <tr>
                <th className="px-4 py-2 font-medium">Line</th>
                <th className="px-4 py-2 font-medium">Orientation</th>
                <th className="px-4 py-2 font-medium">Spread</th>
                <th className="px-4 py-2 font-medium">Ends</th>
                <th className="px-4 py-2 font-medium">Latest approved model</th>
              </tr>
            </thead>
            <tbody>
              {profiles.map((p) => (
                <tr key={p.id} className="border-t border-line" data-testid={`profile-row-${p.name}`}>
                  <td className="px-4 py-2"><Link className="font-medium text-accent hover:underline" href={`/surveys/${survey.slug}/profiles/${encodeURIComponent(p.name)}`}>{p.name}</Link></td>
                  <td className="px-4 py-2">{p.orientationDeg === null ? "—" : `${p.orientationDeg}°`}</td>
                  <td className="px-4 py-2">{p.spreadDescription || "—"}</td>
                  <td className="px-4 py-2 text-ink-soft">{formatEnds(p)}</td>
                  <td className="px-4 py-2" data-testid={`approved-model-${p.name}`}>
                    {p.latestApprovedModel ? (
                      <Link className="text-accent hover:underline" href={`/runs/${p.latestApprovedModel.runId}?step=${encodeURIComponent(p.latestApprovedModel.stepLabel)}`}>
                        run #{p.latestApprovedModel.runId}, {p.latestApprovedModel.stepLabel} (approved by {p.latestApprovedModel.reviewer})
                      </Link>
                    ) : (
                      <span className="muted">none approved yet</span>
                    )}
                  </td>
                </tr>
              ))}
            </tbody>
          </table>
        )}
        {mayEdit ? (
          <details className="border-t border-line p-4">
            <summary className="cursor-pointer text-sm text-accent" data-testid="add-profile-toggle">Add a profile</summary>
            <div className="mt-3 max-w-2xl">
              <RecordForm kind="profile-new" survey={survey.slug} />
            </div>
          </details>
        ) : null}
      </section>

      <section className="card p-4" aria-label="People">
        <h2 className="mb-2">People</h2>
        {people.length === 0 ? (
          <p className="text-sm muted">Nobody is on this survey yet. Leads on a survey are asked to review its runs; everyone on it hears of uploads.</p>
        ) : (
          <ul className="space-y-1 text-sm" data-testid="survey-people">
            {people.map((p) => (
              <li key={p.userId}>
                <span className="font-medium">{p.name}</span> <span className="muted">{p.email}</span> · {p.role}
                {p.active ? null : <span className="muted"> (deactivated)</span>}
              </li>
            ))}
          </ul>
        )}
        {mayEdit ? <div className="mt-3"><PersonForm survey={survey.slug} /></div> : null}
      </section>

      <section className="card overflow-hidden" aria-label="Datasets">
        <h2 className="px-4 pt-4">Datasets</h2>
        {datasets.length === 0 ? (
          <p className="px-4 py-3 text-sm muted">No field data registered yet.</p>
        ) : (
          <table className="mt-2 w-full text-sm" data-testid="survey-datasets">
            <thead className="bg-ground text-left text-xs text-ink-soft">
              <tr>
                <th className="px-4 py-2 font-medium">Dataset</th>
                <th className="px-4 py-2 font-medium">Profile</th>
                <th className="px-4 py-2 font-medium">Files</th>
                <th className="px-4 py-2 font-medium">Size</th>
                <th className="px-4 py-2 font-medium">Registered</th>
              </tr>
            </thead>
            <tbody>
              {datasets.map((d) => (
                <tr key={d.id} className="border-t border-line">
                  <td className="px-4 py-2">{d.name}</td>
                  <td className="px-4 py-2">{d.profileName ?? "—"}</td>
                  <td className="px-4 py-2">{d.fileCount}</td>
                  <td className="px-4 py-2">{formatBytes(d.totalBytes)}</td>
                  <td className="px-4 py-2 text-ink-soft">{formatTime(d.createdAt.getTime())}</td>
                </tr>
              ))}
            </tbody>
          </table>
        )}
      </section>

      <section className="card overflow-hidden" aria-label="Runs">
        <h2 className="px-4 pt-4">Runs</h2>
        <div className="mt-2"><SurveyRuns runs={runs} /></div>
      </section>
    </div>
  );
}
