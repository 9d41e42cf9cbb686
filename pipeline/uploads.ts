/**
 * Field files uploaded from the browser, on the engine's side of the door:
 *
 * - limits: a size limit per file and per upload (settings TRACEWRIGHT_UPLOAD_MAX_FILE_MB and
 *   TRACEWRIGHT_UPLOAD_MAX_TOTAL_MB), checked before a byte is stored;
 * - checks on arrival, with the readers the import and geometry steps use: the format is told from
 *   the bytes (SEG-2 ID, SEG-Y binary header, else text read as a geometry table), a malformed
 *   file is refused with the reader's message (file name and byte offset, or line), a file whose
 *   content another file of the upload has is recorded as a duplicate and not kept twice;
 * - storage: accepted content is kept once, content-addressed by SHA-256, in the field-file store
 *   (pipeline/field-file-store.ts): under <data>/uploads/content/ by default, in an S3-compatible
 *   object store when TRACEWRIGHT_OBJECT_STORE_URL is set (a file already kept is not written again);
 * - completion: the accepted files (fetched back from the object store into the data folder's copy
 *   and checked against their hashes, when they are kept there) become one folder of hard links
 *   (<data>/uploads/profile-<id>/upload-<id>/), registered as one dataset with the same content
 *   hash as any folder, and the profile's pipeline, if it has one, is queued on it by createRun.
 *   A store that fails while the files are fetched leaves the upload open and makes nothing.
 *
 * The resumable transfer itself (tus protocol) is the route handler's: it hands finished files here.
 */
import fs from "node:fs";
import path from "node:path";
import { z } from "zod";
import type { Db } from "../db/client";
import { ensureDataset, getDataset, listDatasetFiles } from "../db/queries/datasets";
import {
  countReceivingFiles,
  findKeptContent,
  findProfilePipelineVersion,
  getProfileWithSurvey,
  getUploadFileByTransfer,
  getUploadSession,
  insertRefusedUploadFile,
  insertUploadFile,
  insertUploadSession,
  listUploadFiles,
  markUploadComplete,
  recordUploadRun,
  refuseUnfinishedFiles,
  recordUploadVerdict,
  type UploadFileRow,
  type UploadSessionRow,
} from "../db/queries/uploads";
import { RecordError } from "../db/errors";
import type { Actor } from "../db/queries/audit";
import { dataDir } from "../db/paths";
import { isIgnoredName, scanFolder } from "./dataset-folder";
import { AppError, FileFormatError, toAppError } from "./errors";
import { fieldFileStore, localContentFile, ObjectStoreError, type FieldFileStore } from "./field-file-store";
import { sha256Hex } from "./hash";
import { isSeg2 } from "./io/seg2";
import { looksLikeSegy } from "./io/segy";
import { parseGeometryTable } from "./io/geometry-table";
import { createRun } from "./run-create";
import { readFieldFile } from "./steps/import-records";

const MIB = 1024 * 1024;

/** Size limits of uploads, bytes. */
export interface UploadLimits {
  /** Largest single file. @default 2 GiB (TRACEWRIGHT_UPLOAD_MAX_FILE_MB=2048) */
  maxFileBytes: number;
  /** Largest upload (all files not refused together). @default 16 GiB (TRACEWRIGHT_UPLOAD_MAX_TOTAL_MB=16384) */
  maxUploadBytes: number;
}

const megabytes = (name: string, fallback: number) =>
  z
    .string()
    .optional()
    .transform((v, ctx) => {
      if (v === undefined || v.trim() === "") return fallback;
      const n = Number(v);
      if (!Number.isFinite(n) || n <= 0) {
        ctx.addIssue({ code: "custom", message: `${name} must be a positive number of MiB, got "${v}"` });
        return z.NEVER;
      }
      return n;
    });

const limitsSchema = z.object({
  TRACEWRIGHT_UPLOAD_MAX_FILE_MB: megabytes("TRACEWRIGHT_UPLOAD_MAX_FILE_MB", 2048),
  TRACEWRIGHT_UPLOAD_MAX_TOTAL_MB: megabytes("TRACEWRIGHT_UPLOAD_MAX_TOTAL_MB", 16384),
});

/**
 * The upload limits from the environment (MiB).
 *
 * @throws AppError "bad-input" naming the setting when it is not a positive number
 */
export function uploadLimits(env: Record<string, string | undefined> = process.env): UploadLimits {
  const parsed = limitsSchema.safeParse({ TRACEWRIGHT_UPLOAD_MAX_FILE_MB: env.TRACEWRIGHT_UPLOAD_MAX_FILE_MB, TRACEWRIGHT_UPLOAD_MAX_TOTAL_MB: env.TRACEWRIGHT_UPLOAD_MAX_TOTAL_MB });
  if (!parsed.success) {
    const issue = parsed.error.issues[0];
    throw new AppError("bad-input", issue.message, { field: String(issue.path[0]) });
  }
  return {
    maxFileBytes: Math.floor(parsed.data.TRACEWRIGHT_UPLOAD_MAX_FILE_MB * MIB),
    maxUploadBytes: Math.floor(parsed.data.TRACEWRIGHT_UPLOAD_MAX_TOTAL_MB * MIB),
  };
}

/** A file or an upload over a size limit (HTTP 413). */
export class UploadTooLargeError extends AppError {
  constructor(message: string) {
    super("bad-input", message, { field: "size" });
    this.name = "UploadTooLargeError";
  }
  override get httpStatus(): number {
    return 413;
  }
}

/** Sizes for people: "1.5 MiB". */
export function formatBytes(bytes: number): string {
  if (bytes < 1024) return `${bytes} bytes`;
  if (bytes < MIB) return `${(bytes / 1024).toFixed(1)} KiB`;
  if (bytes < 1024 * MIB) return `${(bytes / MIB).toFixed(1)} MiB`;
  return `${(bytes / (1024 * MIB)).toFixed(2)} GiB`;
}

/** Where uploads live: <data>/uploads. */
export function uploadsDir(): string {
  return path.join(dataDir(), "uploads");
}

/** Where transfers in progress are written (the tus file store's folder). */
export function transfersDir(): string {
  return path.join(uploadsDir(), "transfers");
}

/** The folder an upload's accepted files become, as a dataset. */
export function uploadFolder(profileId: number, sessionId: number): string {
  return path.join(uploadsDir(), `profile-${profileId}`, `upload-${sessionId}`);
}

/** Opens an upload on a profile. @throws AppError "not-found" for an unknown profile */
export function openUpload(db: Db, profileId: number, actor: Actor): UploadSessionRow {
  const p = getProfileWithSurvey(db, profileId);
  if (!p) throw new AppError("not-found", `Profile ${profileId} does not exist`, { field: "profileId" });
  return insertUploadSession(db, { surveyId: p.survey.id, profileId, actor });
}

/** A file name fit for a dataset folder: no folder part, not hidden, not a partial-copy name. */
function checkFileName(name: string): string | null {
  if (name === "" || name.length > 200) return "a file name of 1 to 200 characters";
  if (/[/\\\0]/.test(name) || name === "." || name === "..") return "a plain file name without a folder";
  if (isIgnoredName(name)) return "a name that is not hidden (.name) or a partial copy (~, .part, .tmp)";
  return null;
}

/**
 * Admits a file about to be sent: the upload is open, the name fits, the file and the upload stay
 * within the limits, and no file of that name is in the upload. Records it as receiving; a file
 * refused here is recorded too (so the upload lists it) and the error says why.
 *
 * @throws UploadTooLargeError (413) over a limit; AppError "bad-input" for a bad name, "conflict" for a closed upload or a taken name
 */
export function admitFile(db: Db, f: { sessionId: number; transferId: string; name: string; sizeBytes: number; limits: UploadLimits }): UploadFileRow {
  const refuse = (err: AppError): never => {
    if (getUploadSession(db, f.sessionId)?.state === "open") {
      insertRefusedUploadFile(db, { sessionId: f.sessionId, transferId: f.transferId, name: f.name.slice(0, 200), sizeBytes: Math.max(0, f.sizeBytes), message: err.message });
    }
    throw err;
  };
  const badName = checkFileName(f.name);
  if (badName) refuse(new AppError("bad-input", `${f.name.slice(0, 200)}: refused, expected ${badName}`, { field: "name", file: f.name }));
  if (!Number.isSafeInteger(f.sizeBytes) || f.sizeBytes < 0) {
    refuse(new AppError("bad-input", `${f.name}: the file's size must be known before it is sent`, { field: "size", file: f.name }));
  }
  if (f.sizeBytes > f.limits.maxFileBytes) {
    refuse(new UploadTooLargeError(`${f.name}: ${formatBytes(f.sizeBytes)} is over the limit of ${formatBytes(f.limits.maxFileBytes)} per file (setting TRACEWRIGHT_UPLOAD_MAX_FILE_MB)`));
  }
  try {
    return insertUploadFile(db, {
      ...f,
      maxUploadBytes: f.limits.maxUploadBytes,
      tooLarge: (total) =>
        `${f.name}: refused, the upload would hold ${formatBytes(total)}, over the limit of ${formatBytes(f.limits.maxUploadBytes)} per upload (setting TRACEWRIGHT_UPLOAD_MAX_TOTAL_MB); complete this upload and start another`,
    });
  } catch (err) {
    if (err instanceof RecordError && err.field === "size") return refuse(new UploadTooLargeError(err.message));
    if (err instanceof RecordError && err.field === "name") return refuse(toAppError(err));
    throw toAppError(err);
  }
}

/** What the checks on arrival found in a file's bytes. */
export type ArrivalCheck =
  | { ok: true; format: "seg2" | "segy"; summary: string }
  | { ok: true; format: "geometry-table"; summary: string }
  | { ok: false; format: string | null; message: string; byteOffset: number | null };

/** True when the bytes read as UTF-8 text without NUL characters (a CSV, not a binary record). */
function looksLikeText(bytes: Uint8Array): boolean {
  const head = bytes.subarray(0, Math.min(bytes.length, 64 * 1024));
  if (head.includes(0)) return false;
  try {
    new TextDecoder("utf-8", { fatal: true }).decode(bytes);
    return true;
  } catch {
    return false;
  }
}

/**
 * Checks one file by its bytes, with the engine's readers: SEG-2 (ID 0x3a55 at byte 0) and SEG-Y
 * (binary header) through the import step's `readFieldFile`; text through the geometry table
 * reader; anything else through `readFieldFile`, whose format detection names what it expected
 * at which byte. Never throws for a bad file: the reader's message is the verdict.
 */
export function checkFieldFileBytes(name: string, bytes: Uint8Array): ArrivalCheck {
  const binary = isSeg2(bytes) || looksLikeSegy(bytes);
  try {
    if (!binary && bytes.length > 0 && looksLikeText(bytes)) {
      const table = parseGeometryTable(new TextDecoder("utf-8").decode(bytes), name);
      return { ok: true, format: "geometry-table", summary: `geometry table, ${table.files.length} field files (${table.form} form)` };
    }
    const read = readFieldFile(name, bytes, "z");
    const traces = read.gathers.reduce((s, g) => s + g.traces.length, 0);
    const g = read.gathers[0];
    return {
      ok: true,
      format: read.format,
      summary: `${read.format === "seg2" ? "SEG-2" : "SEG-Y"}, ${read.gathers.length} gather${read.gathers.length === 1 ? "" : "s"}, ${traces} traces × ${g?.sampleCount ?? 0} samples at ${((g?.sampleIntervalS ?? 0) * 1000).toFixed(3)} ms`,
    };
  } catch (err) {
    const e = toAppError(err);
    const format = binary ? (isSeg2(bytes) ? "seg2" : "segy") : null;
    return { ok: false, format, message: e.message, byteOffset: err instanceof FileFormatError ? (e.details.byteOffset ?? null) : null };
  }
}

/**
 * Checks a finished transfer (the file at `filePath`) and records its verdict: accepted (content
 * kept once in the field-file store), duplicate (same content as another file of the upload, not
 * kept twice) or refused (the reader's message). The transfer's file is moved or removed either
 * way. A good file the store could not take (object store unreachable, bucket missing, credentials
 * refused) is recorded as refused with the store's message, which names the setting and the object
 * key: it never becomes part of a dataset, and the crew can send it again once the store answers.
 *
 * @param store where accepted content is kept. @default the store the settings choose ({@link fieldFileStore}); wrong settings refuse the file with their message
 */
export async function checkArrivedFile(db: Db, transferId: string, filePath: string, store?: FieldFileStore): Promise<UploadFileRow> {
  const file = getUploadFileByTransfer(db, transferId);
  if (!file) throw new AppError("not-found", `No upload file for transfer ${transferId}`);
  const bytes = fs.readFileSync(filePath);
  const sha256 = sha256Hex(bytes);
  let check: ArrivalCheck =
    bytes.length !== file.sizeBytes
      ? { ok: false, format: null, message: `${file.name}: ${bytes.length} bytes arrived, ${file.sizeBytes} announced`, byteOffset: bytes.length }
      : checkFieldFileBytes(file.name, bytes);
  let storedPath: string | null = null;
  if (check.ok) {
    // Kept before the verdict is recorded, so an accepted file always has its content kept.
    try {
      storedPath = (await (store ?? fieldFileStore()).keep(sha256, filePath)).location;
    } catch (err) {
      // The store failing, or its settings wrong (named by objectStoreSettings), refuse this file only.
      const badSetting = err instanceof AppError && err.code === "bad-input" && (err.details.field ?? "").startsWith("TRACEWRIGHT_OBJECT_STORE_");
      if (!(err instanceof ObjectStoreError) && !badSetting) throw err;
      console.error(`[uploads] ${file.name} not kept: ${err.message}`);
      check = { ok: false, format: check.format, message: `${file.name}: checked and good, but not kept: ${err.message}; send it again once the store answers`, byteOffset: null };
    }
  }
  const recorded = recordUploadVerdict(db, transferId, {
    sha256,
    format: check.format,
    verdict: check.ok ? "accepted" : "refused",
    message: check.ok ? check.summary : check.message,
    byteOffset: check.ok ? null : check.byteOffset,
    storedPath,
  });
  fs.rmSync(filePath, { force: true });
  return recorded;
}

/** Puts `source` at `target` as a hard link (a copy across file systems), replacing what was there. */
function placeFile(source: string, target: string): void {
  if (fs.existsSync(target)) fs.rmSync(target);
  try {
    fs.linkSync(source, target);
  } catch {
    fs.copyFileSync(source, target);
  }
}

/**
 * Puts back files that have gone from the folder of a dataset made from an upload (the folder
 * cleared to save space, say), each from where its content was kept (the object store or the data
 * folder's content) and checked against its SHA-256 on the way. The runner calls it before it
 * reads a dataset's files; a folder outside <data>/uploads is never written (it is the crew's),
 * and a file present is left to the runner's own hash check. Returns the names put back.
 *
 * @throws ObjectStoreError when the object store fails while a file is fetched
 */
export async function restoreUploadedDataset(db: Db, datasetId: number): Promise<string[]> {
  const ds = getDataset(db, datasetId);
  if (!ds?.folderPath) return [];
  const rel = path.relative(uploadsDir(), ds.folderPath);
  if (rel === "" || rel.startsWith("..") || path.isAbsolute(rel)) return [];
  const restored: string[] = [];
  for (const f of listDatasetFiles(db, datasetId)) {
    const target = path.join(ds.folderPath, f.name);
    if (fs.existsSync(target)) continue;
    const location = findKeptContent(db, f.sha256);
    if (!location) continue; // the runner then names the file that has gone
    const source = await localContentFile(f.sha256, location);
    fs.mkdirSync(ds.folderPath, { recursive: true });
    placeFile(source, target);
    restored.push(f.name);
  }
  return restored;
}

/** What completing an upload made. */
export interface CompletedUpload {
  datasetId: number;
  folder: string;
  contentHash: string;
  files: number;
  /** The run queued with the profile's pipeline, or null when the profile has none. */
  runId: number | null;
  pipeline: { id: number; name: string; version: number } | null;
}

/**
 * Marks an upload complete: its accepted files become one folder and one dataset (content hash
 * as for any folder), and the profile's pipeline, if it has one, is queued on it with createRun.
 * Refused and duplicate files are not part of it. Files kept in the object store are fetched into
 * the data folder's copy first (each checked against its SHA-256); a failure there throws before
 * anything is made, and the upload stays open. Executing the queued run is the caller's (the
 * control room hands it to a background engine process).
 *
 * @param opts.leaveOutUnfinished files still on their way are recorded as refused and left out, instead of refusing to complete
 * @throws AppError "conflict" when the upload is not open, files are still on their way, or no file was accepted; ObjectStoreError when kept content cannot be fetched
 */
export async function completeUpload(db: Db, sessionId: number, actor: Actor, opts: { leaveOutUnfinished?: boolean } = {}): Promise<CompletedUpload> {
  const session = getUploadSession(db, sessionId);
  if (!session) throw new AppError("not-found", `Upload ${sessionId} does not exist`, { field: "sessionId" });
  if (session.state !== "open") throw new AppError("conflict", `Upload ${sessionId} is already ${session.state}`);
  if (opts.leaveOutUnfinished) refuseUnfinishedFiles(db, sessionId, "left out: the upload was marked complete before this file had arrived");
  const receiving = countReceivingFiles(db, sessionId);
  if (receiving > 0) throw new AppError("conflict", `${receiving} file${receiving === 1 ? " is" : "s are"} still being sent; wait for ${receiving === 1 ? "it" : "them"} or complete without ${receiving === 1 ? "it" : "them"}`);
  const accepted = listUploadFiles(db, sessionId).filter((f) => f.verdict === "accepted" && f.storedPath);
  if (accepted.length === 0) throw new AppError("conflict", `Upload ${sessionId} has no accepted file; nothing to make a dataset of`);
  // Every file local and checked before anything is made: nothing half-made when the store fails.
  const sources: string[] = [];
  for (const f of accepted) sources.push(await localContentFile(f.sha256!, f.storedPath!));
  // Checked again after the awaits: another request may have completed the upload meanwhile.
  const now = getUploadSession(db, sessionId);
  if (now?.state !== "open") throw new AppError("conflict", `Upload ${sessionId} is already ${now?.state ?? "gone"}`);
  const p = getProfileWithSurvey(db, session.profileId)!;
  const folder = uploadFolder(session.profileId, sessionId);
  fs.mkdirSync(folder, { recursive: true });
  for (const [i, f] of accepted.entries()) placeFile(sources[i], path.join(folder, f.name));
  const scanned = scanFolder(folder);
  const dataset = ensureDataset(db, {
    folderPath: folder,
    contentHash: scanned.contentHash,
    files: scanned.files,
    surveyId: p.survey.id,
    profileId: p.profile.id,
    name: `${p.profile.name} upload ${sessionId}`,
  });
  // Claimed first: of two requests completing the same upload at once, one queues the run.
  markUploadComplete(db, sessionId, { datasetId: dataset.id, actor, files: accepted.length });
  const pipeline = findProfilePipelineVersion(db, session.profileId);
  const runId = pipeline ? createRun(db, { source: "pipeline-version", pipelineVersionId: pipeline.id, datasetId: dataset.id, actor }).runId : null;
  if (runId !== null) recordUploadRun(db, sessionId, runId);
  return { datasetId: dataset.id, folder, contentHash: scanned.contentHash, files: accepted.length, runId, pipeline };
}
