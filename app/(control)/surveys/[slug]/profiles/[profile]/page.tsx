import type { Metadata } from "next";
import Link from "next/link";
import { notFound } from "next/navigation";
import { getDb } from "@/db/client";
import { getProfile, getSurveyBySlug, latestApprovedModels, surveyRuns } from "@/db/queries/surveys";
import { pageUserWith } from "@/app/lib/page-user";
import { can } from "@/app/lib/permissions";
import { RecordForm } from "@/app/ui/surveys/record-form";
import { SurveyRuns, formatEnds } from "@/app/ui/surveys/survey-runs";

export const metadata: Metadata = { title: "Profile" };
export const dynamic = "force-dynamic";

/**
 * One profile (line) of a survey. A server component in plain sections: the line's record, its
 * latest approved model, its runs, and (for those who may) the form to change it.
 */
export default async function ProfilePage({ params }: { params: Promise<{ slug: string; profile: string }> }) {
  const user = await pageUserWith("runs.read");
  const { slug, profile: rawName } = await params;
  const db = getDb();
  const survey = getSurveyBySlug(db, slug);
  // Next hands params decoded; a name that still looks escaped is decoded once more if it can be.
  let name = rawName;
  try {
    name = decodeURIComponent(rawName);
  } catch {
    // not an escape: keep it as it came
  }
  const profile = survey ? getProfile(db, survey.id, name) : null;
  if (!survey || !profile) notFound();
  const approved = latestApprovedModels(db, survey.id).get(profile.id) ?? null;
  const runs = surveyRuns(db, survey.id, profile.id);
  const mayEdit = can(user.role, "surveys.edit");
  const facts: Array<[string, string]> = [
    ["Orientation", profile.orientationDeg === null ? "" : `${profile.orientationDeg}° clockwise from grid north`],
    ["Spread", profile.spreadDescription],
    ["Coordinate reference", profile.crs],
    ["Ends (start → end)", formatEnds(profile) === "—" ? "" : formatEnds(profile)],
    ["Description", profile.description],
  ];
  return (
    <div className="space-y-6">
      <div>
        <p className="text-sm">
          <Link href="/surveys" className="text-accent hover:underline">Surveys</Link> /{" "}
          <Link href={`/surveys/${survey.slug}`} className="text-accent hover:underline">{survey.name}</Link> /
        </p>
        <h1 data-testid="profile-title">Line {profile.name}</h1>
      </div>

      {can(user.role, "uploads.send") ? (
        <section className="card p-4" aria-label="Field files" data-testid="profile-upload">
          <h2 className="mb-2">Field files</h2>
          <p className="text-sm">
            Back from the field? Hand in this line&apos;s SEG-2 or SEG-Y files and the geometry table:{" "}
            <Link
              href={`/uploads?survey=${encodeURIComponent(survey.slug)}&profile=${encodeURIComponent(profile.name)}`}
              className="text-accent hover:underline"
              data-testid="profile-upload-link"
            >
              upload field files to line {profile.name}
            </Link>{" "}
            (resumable; each file checked on arrival).
          </p>
        </section>
      ) : null}

      <section className="card p-4" aria-label="The line" data-testid="profile-details">
        <h2 className="mb-2">The line</h2>
        <dl className="grid gap-x-6 gap-y-2 text-sm sm:grid-cols-[12rem_1fr]">
          {facts.map(([k, v]) => (
            <div key={k} className="contents">
              <dt className="text-ink-soft">{k}</dt>
              <dd className="whitespace-pre-line">{v || "—"}</dd>
            </div>
          ))}
        </dl>
      </section>

      <section className="card p-4" aria-label="Latest approved model">
        <h2 className="mb-2">Latest approved model</h2>
        {approved ? (
          <p className="text-sm">
            <Link className="text-accent hover:underline" href={`/runs/${approved.runId}?step=${encodeURIComponent(approved.stepLabel)}`}>
              Run #{approved.runId}, step {approved.stepLabel}
            </Link>{" "}
            — approved by {approved.reviewer}.
          </p>
        ) : (
          <p className="text-sm muted">No run of this line with a model has been approved yet.</p>
        )}
      </section>

      <section className="card overflow-hidden" aria-label="Runs">
        <h2 className="px-4 pt-4">Runs of this line</h2>
        <div className="mt-2"><SurveyRuns runs={runs} showProfile={false} /></div>
      </section>

      {mayEdit ? (
        <section className="card p-4" aria-label="Change the line">
          <h2 className="mb-3">Change the line</h2>
          <div className="max-w-2xl">
            <RecordForm
              kind="profile-edit"
              survey={survey.slug}
              initial={{
                name: profile.name,
                description: profile.description,
                orientationDeg: profile.orientationDeg,
                spreadDescription: profile.spreadDescription,
                crs: profile.crs,
                startX: profile.startX,
                startY: profile.startY,
                endX: profile.endX,
                endY: profile.endY,
              }}
            />
          </div>
        </section>
      ) : null}
    </div>
  );
}
