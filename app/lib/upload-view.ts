/** What the upload page and GET /api/upload-sessions/:id show of an upload (JSON-safe, no database types). */

export type UploadVerdictName = "receiving" | "accepted" | "duplicate" | "refused" | "expired";

export interface UploadFileView {
  transferId: string;
  name: string;
  sizeBytes: number;
  /** Bytes the server received for it over all requests (equal to the size when nothing was sent twice). */
  receivedBytes: number;
  format: string | null;
  verdict: UploadVerdictName;
  message: string;
  byteOffset: number | null;
  sha256: string | null;
}

export interface UploadSessionView {
  id: number;
  state: "open" | "complete" | "abandoned";
  survey: { id: number; slug: string; name: string };
  profile: { id: number; name: string };
  createdBy: string;
  createdAt: number;
  completedAt: number | null;
  datasetId: number | null;
  runId: number | null;
  /** The pipeline completing it queues (or queued), if the profile has one. */
  pipeline: { id: number; name: string; version: number } | null;
  files: UploadFileView[];
}
