import type { Metadata } from "next";
import { getDb } from "@/db/client";
import { findProfilePipelineVersion, getUploadSession, listProfilesWithSurveys } from "@/db/queries/uploads";
import { pageUserWith } from "@/app/lib/page-user";
import { readUploadSession } from "@/app/lib/upload-reads";
import { UploadPanel } from "@/app/ui/uploads/upload-panel";
import { uploadLimits } from "@/pipeline/uploads";

export const metadata: Metadata = { title: "Upload field files" };
export const dynamic = "force-dynamic";

type Search = { survey?: string; profile?: string; upload?: string };

/**
 * Uploads of field files to one profile. The profile is chosen here, or given in the address:
 * ?survey=<slug or id>&profile=<name or id> (e.g. ?survey=quillmoor&profile=QM-1); ?upload=<id>
 * continues an open upload of that profile.
 */
export default async function UploadsPage({ searchParams }: { searchParams: Promise<Search> }) {
  await pageUserWith("uploads.send");
  const q = await searchParams;
  const db = getDb();
  const profiles = listProfilesWithSurveys(db);
  const matches = (value: string | undefined, id: number, name: string) => value !== undefined && (value === String(id) || value === name);
  const chosen = q.profile
    ? (profiles.find((p) => matches(q.profile, p.profileId, p.profileName) && (q.survey === undefined || matches(q.survey, p.surveyId, p.surveySlug))) ?? null)
    : null;
  const limits = uploadLimits();
  const uploadId = Number(q.upload);
  const open = chosen && Number.isSafeInteger(uploadId) && getUploadSession(db, uploadId)?.profileId === chosen.profileId ? readUploadSession(uploadId) : null;
  const pipeline = chosen ? findProfilePipelineVersion(db, chosen.profileId) : null;

  return (
    <div className="mx-auto max-w-5xl space-y-4">
      <div>
        <h1>Upload field files</h1>
        <p className="text-ink-soft">
          Send a crew&apos;s folder from this browser. Each file is checked on arrival by the readers the engine uses; nothing becomes a dataset until you mark the upload complete.
        </p>
      </div>
      <form method="get" className="card flex flex-wrap items-end gap-3 p-4" aria-label="Choose the profile">
        <label className="label min-w-64 flex-1">
          Survey and profile
          <select name="profile" className="field mt-1" defaultValue={chosen ? String(chosen.profileId) : ""} data-testid="upload-profile">
            <option value="" disabled>
              Choose a profile
            </option>
            {profiles.map((p) => (
              <option key={p.profileId} value={p.profileId}>
                {p.surveyName} · {p.profileName}
              </option>
            ))}
          </select>
        </label>
        <button type="submit" className="btn">
          Choose
        </button>
      </form>
      {q.profile && !chosen ? (
        <p role="alert" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad">
          No profile &quot;{q.profile}&quot;{q.survey ? ` in survey "${q.survey}"` : ""}; choose one above.
        </p>
      ) : null}
      {profiles.length === 0 ? <p className="muted">No survey has a profile yet: record one first (a pipeline file naming its survey and profile does).</p> : null}
      {chosen ? (
        <>
          <p className="text-sm" data-testid="upload-target">
            To <strong>{chosen.surveyName}</strong>, profile <strong>{chosen.profileName}</strong>
            {pipeline ? (
              <>
                {" "}
                · completing the upload queues <span className="font-mono">{pipeline.name}</span> v{pipeline.version}
              </>
            ) : (
              " · the profile has no pipeline yet: the upload becomes a dataset and nothing is queued"
            )}
          </p>
          <UploadPanel
            key={chosen.profileId}
            profile={{ id: chosen.profileId, name: chosen.profileName, surveyName: chosen.surveyName }}
            pipeline={pipeline ? { name: pipeline.name, version: pipeline.version } : null}
            limits={limits}
            initialUpload={open}
          />
        </>
      ) : null}
    </div>
  );
}
