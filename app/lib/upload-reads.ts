/** Server reads of uploads for the upload page and its route handlers. */
import "server-only";
import { getDb } from "@/db/client";
import { findProfilePipelineVersion, getProfileWithSurvey, getUploadSession, listUploadFiles } from "@/db/queries/uploads";
import { AppError } from "@/pipeline/errors";
import type { UploadSessionView } from "./upload-view";

/** An upload with its files. @throws AppError "not-found" */
export function readUploadSession(id: number): UploadSessionView {
  const db = getDb();
  const s = getUploadSession(db, id);
  if (!s) throw new AppError("not-found", `Upload ${id} does not exist`, { field: "sessionId" });
  const p = getProfileWithSurvey(db, s.profileId)!;
  return {
    id: s.id,
    state: s.state,
    survey: { id: p.survey.id, slug: p.survey.slug, name: p.survey.name },
    profile: { id: p.profile.id, name: p.profile.name },
    createdBy: s.createdByLabel,
    createdAt: s.createdAt.getTime(),
    completedAt: s.completedAt ? s.completedAt.getTime() : null,
    datasetId: s.datasetId,
    runId: s.runId,
    pipeline: findProfilePipelineVersion(db, s.profileId),
    files: listUploadFiles(db, id).map((f) => ({
      transferId: f.transferId,
      name: f.name,
      sizeBytes: f.sizeBytes,
      receivedBytes: f.receivedBytes,
      format: f.format,
      verdict: f.verdict,
      message: f.message,
      byteOffset: f.byteOffset,
      sha256: f.sha256,
    })),
  };
}
