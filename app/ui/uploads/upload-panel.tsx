"use client";

/**
 * Dropping a crew's folder (or many files) on a profile: every file goes to the server by the
 * resumable tus protocol (tus-js-client), in chunks, three at a time; a transfer cut off by a poor
 * connection is retried, and when the retries are spent it waits for "Resume", which asks the
 * server for the offset it holds and goes on from there. Each file shows its progress, then the
 * verdict of the checks on arrival. "Mark upload complete" turns the accepted files into one
 * dataset and queues the profile's pipeline.
 *
 * Self-contained: give it the profile; it opens its upload on the first file (or continues the
 * one in `initialUpload`).
 */
import { useCallback, useEffect, useRef, useState } from "react";
import Link from "next/link";
import * as tus from "tus-js-client";
import { ApiError, getJson, postJson } from "@/app/lib/queries";
import type { UploadSessionView, UploadVerdictName } from "@/app/lib/upload-view";

/** Chunk size of the transfer: under the 10 MB the proxy buffers of a request body. */
export const TRANSFER_CHUNK_BYTES = 8 * 1024 * 1024;
/** Files sent at once. */
const PARALLEL_FILES = 3;

type RowState = "waiting" | "sending" | "paused" | "interrupted" | "checking" | UploadVerdictName;

interface Row {
  key: string;
  name: string;
  size: number;
  sent: number;
  state: RowState;
  message: string;
  byteOffset: number | null;
  transferId: string | null;
  /** Sent from this page (it can be paused and resumed here). */
  local: boolean;
}

interface Props {
  profile: { id: number; name: string; surveyName: string };
  /** The pipeline completing the upload queues, if the profile has one. */
  pipeline: { name: string; version: number } | null;
  limits: { maxFileBytes: number; maxUploadBytes: number };
  /** An open upload to continue (e.g. after the page was reloaded). */
  initialUpload?: UploadSessionView | null;
}

function formatBytes(bytes: number): string {
  if (bytes < 1024) return `${bytes} bytes`;
  if (bytes < 1048576) return `${(bytes / 1024).toFixed(1)} KiB`;
  if (bytes < 1073741824) return `${(bytes / 1048576).toFixed(1)} MiB`;
  return `${(bytes / 1073741824).toFixed(2)} GiB`;
}

const STATE_WORDS: Record<RowState, string> = {
  waiting: "waiting",
  sending: "sending",
  paused: "paused",
  interrupted: "interrupted",
  checking: "checking",
  receiving: "sending",
  accepted: "accepted",
  duplicate: "duplicate, not kept",
  refused: "refused",
  expired: "expired, send again",
};

const STATE_CLASS: Record<RowState, string> = {
  waiting: "bg-ground text-ink-soft",
  sending: "bg-accent-soft text-accent",
  paused: "bg-warn-soft text-warn",
  interrupted: "bg-warn-soft text-warn",
  checking: "bg-accent-soft text-accent",
  receiving: "bg-accent-soft text-accent",
  accepted: "bg-ok-soft text-ok",
  duplicate: "bg-warn-soft text-warn",
  refused: "bg-bad-soft text-bad",
  expired: "bg-warn-soft text-warn",
};

/** Files of a dropped folder (directory entries read recursively), or the dropped files. */
async function droppedFiles(data: DataTransfer): Promise<File[]> {
  const entries = [...data.items].map((i) => i.webkitGetAsEntry?.()).filter((e): e is FileSystemEntry => Boolean(e));
  if (entries.length === 0) return [...data.files];
  const out: File[] = [];
  const walk = async (entry: FileSystemEntry): Promise<void> => {
    if (entry.isFile) {
      out.push(await new Promise<File>((resolve, reject) => (entry as FileSystemFileEntry).file(resolve, reject)));
      return;
    }
    const reader = (entry as FileSystemDirectoryEntry).createReader();
    for (;;) {
      const batch = await new Promise<FileSystemEntry[]>((resolve, reject) => reader.readEntries(resolve, reject));
      if (batch.length === 0) break;
      for (const e of batch) await walk(e);
    }
  };
  for (const e of entries) await walk(e);
  return out;
}

export function UploadPanel({ profile, pipeline, limits, initialUpload = null }: Props) {
  const [sessionId, setSessionId] = useState<number | null>(initialUpload?.state === "open" ? initialUpload.id : null);
  const [rows, setRows] = useState<Row[]>(() =>
    (initialUpload?.state === "open" ? initialUpload.files : []).map((f) => ({
      key: f.transferId,
      name: f.name,
      size: f.sizeBytes,
      sent: f.verdict === "receiving" ? 0 : f.sizeBytes,
      state: f.verdict === "receiving" ? "interrupted" : f.verdict,
      message: f.verdict === "receiving" ? "drop the file again to go on from where it stopped" : f.message,
      byteOffset: f.byteOffset,
      transferId: f.transferId,
      local: false,
    })),
  );
  const [dragging, setDragging] = useState(false);
  const [error, setError] = useState<string | null>(null);
  const [done, setDone] = useState<{ datasetId: number; runId: number | null; files: number } | null>(null);
  const [completing, setCompleting] = useState(false);
  const uploads = useRef(new Map<string, tus.Upload>());
  const queue = useRef<string[]>([]);
  const active = useRef(new Set<string>());
  const sessionRef = useRef<number | null>(sessionId);
  const counter = useRef(0);

  const patchRow = useCallback((key: string, change: Partial<Row>) => setRows((rs) => rs.map((r) => (r.key === key ? { ...r, ...change } : r))), []);

  /** Verdicts as the server recorded them (the source of truth for every finished file). */
  const refresh = useCallback(async () => {
    const id = sessionRef.current;
    if (id === null) return;
    const view = await getJson<UploadSessionView>(`/api/upload-sessions/${id}`);
    const byTransfer = new Map(view.files.map((f) => [f.transferId, f]));
    setRows((rs) =>
      rs.map((r) => {
        const f = r.transferId ? byTransfer.get(r.transferId) : undefined;
        if (!f || f.verdict === "receiving") return r;
        return { ...r, state: f.verdict, message: f.message, byteOffset: f.byteOffset, sent: r.size };
      }),
    );
  }, []);

  const pump = useCallback(() => {
    while (active.current.size < PARALLEL_FILES && queue.current.length > 0) {
      const key = queue.current.shift()!;
      const upload = uploads.current.get(key);
      if (!upload) continue;
      active.current.add(key);
      patchRow(key, { state: "sending", message: "" });
      upload.start();
    }
  }, [patchRow]);

  const finished = useCallback(
    (key: string) => {
      active.current.delete(key);
      pump();
    },
    [pump],
  );

  async function ensureSession(): Promise<number> {
    if (sessionRef.current !== null) return sessionRef.current;
    const res = await postJson<{ sessionId: number }>("/api/upload-sessions", { profileId: profile.id });
    sessionRef.current = res.sessionId;
    setSessionId(res.sessionId);
    const url = new URL(window.location.href);
    url.searchParams.set("upload", String(res.sessionId));
    window.history.replaceState(null, "", url);
    return res.sessionId;
  }

  async function addFiles(files: File[]) {
    setError(null);
    if (files.length === 0) return;
    let session: number;
    try {
      session = await ensureSession();
    } catch (err) {
      setError(err instanceof ApiError ? err.message : String(err));
      return;
    }
    const fresh: Row[] = [];
    for (const file of files) {
      // A file dropped again after an interruption goes on from where it stopped.
      const again = rows.find((r) => r.name === file.name && r.size === file.size && (r.state === "interrupted" || r.state === "paused"));
      const key = again?.key ?? `f${++counter.current}`;
      const upload = new tus.Upload(file, {
        endpoint: "/api/uploads",
        chunkSize: TRANSFER_CHUNK_BYTES,
        retryDelays: [0, 1000, 3000],
        metadata: { sessionId: String(session), filename: file.name },
        // One fingerprint per upload and file, so the same file in another upload starts afresh.
        fingerprint: async () => ["tracewright", String(session), file.name, String(file.size), String(file.lastModified)].join("/"),
        removeFingerprintOnSuccess: true,
        onProgress: (sent) => patchRow(key, { sent, state: sent >= file.size ? "checking" : "sending" }),
        onUploadUrlAvailable: () => patchRow(key, { transferId: upload.url?.split("/").pop() ?? null }),
        onSuccess: (payload) => {
          let verdict: { verdict?: UploadVerdictName; message?: string; byteOffset?: number | null } = {};
          try {
            verdict = JSON.parse(payload.lastResponse.getBody() || "{}") as typeof verdict;
          } catch {
            // an empty answer: the session read below has it
          }
          patchRow(key, { sent: file.size, state: verdict.verdict ?? "checking", message: verdict.message ?? "", byteOffset: verdict.byteOffset ?? null });
          finished(key);
          void refresh();
        },
        onError: (err) => {
          const res = (err as tus.DetailedError).originalResponse;
          const status = res?.getStatus() ?? 0;
          if (status >= 400 && status < 500 && status !== 409 && status !== 423) {
            // Refused by the server (a limit, a name, a closed upload): its message is the verdict.
            patchRow(key, { state: "refused", message: res?.getBody()?.trim() || err.message });
          } else {
            patchRow(key, { state: "interrupted", message: "the connection failed; Resume goes on from the last byte the server holds" });
          }
          finished(key);
        },
      });
      uploads.current.set(key, upload);
      if (again) {
        const previous = await upload.findPreviousUploads();
        if (previous.length > 0) upload.resumeFromPreviousUpload(previous[0]);
        patchRow(key, { state: "waiting", message: "", local: true });
      } else {
        fresh.push({ key, name: file.name, size: file.size, sent: 0, state: "waiting", message: "", byteOffset: null, transferId: null, local: true });
      }
      queue.current.push(key);
    }
    setRows((rs) => [...rs, ...fresh]);
    pump();
  }

  function pause(key: string) {
    const u = uploads.current.get(key);
    if (!u) return;
    void u.abort();
    active.current.delete(key);
    patchRow(key, { state: "paused", message: "paused; Resume goes on from the last byte the server holds" });
    pump();
  }

  function resume(key: string) {
    if (!uploads.current.has(key)) return;
    queue.current.push(key);
    patchRow(key, { state: "waiting", message: "" });
    pump();
  }

  async function complete(leaveOutUnfinished = false) {
    if (sessionRef.current === null) return;
    setCompleting(true);
    setError(null);
    try {
      const res = await postJson<{ datasetId: number; runId: number | null; files: number }>(`/api/upload-sessions/${sessionRef.current}/complete`, { leaveOutUnfinished });
      setDone(res);
    } catch (err) {
      setError(err instanceof ApiError ? err.message : String(err));
    } finally {
      setCompleting(false);
    }
  }

  useEffect(() => {
    const all = uploads.current;
    return () => {
      for (const u of all.values()) void u.abort();
    };
  }, []);

  const count = (s: RowState) => rows.filter((r) => r.state === s).length;
  const inFlight = rows.some((r) => ["waiting", "sending", "checking", "paused", "interrupted"].includes(r.state));
  const moving = rows.some((r) => ["waiting", "sending", "checking"].includes(r.state));
  const stopped = count("paused") + count("interrupted");
  const sentBytes = rows.reduce((s, r) => s + r.sent, 0);
  const totalBytes = rows.reduce((s, r) => s + r.size, 0);

  return (
    <section className="space-y-4" aria-label="Upload field files" data-testid="upload-panel">
      <div
        data-testid="drop-zone"
        onDragOver={(e) => {
          e.preventDefault();
          if (!done) setDragging(true);
        }}
        onDragLeave={() => setDragging(false)}
        onDrop={(e) => {
          e.preventDefault();
          setDragging(false);
          if (done) return;
          void droppedFiles(e.dataTransfer).then(addFiles);
        }}
        className={`card flex flex-col items-center gap-3 border-2 border-dashed p-8 text-center ${dragging ? "border-accent bg-accent-soft" : ""}`}
      >
        <p className="font-medium">Drop the crew&apos;s folder or field files here</p>
        <p className="text-sm text-ink-soft">
          SEG-2, SEG-Y and the geometry table (CSV), told apart by their content. Up to {formatBytes(limits.maxFileBytes)} per file and {formatBytes(limits.maxUploadBytes)} per upload. An interrupted transfer goes on from where it stopped.
        </p>
        <div className="flex gap-2">
          <label className="btn cursor-pointer">
            Choose files
            <input type="file" multiple className="sr-only" data-testid="choose-files" disabled={Boolean(done)} onChange={(e) => void addFiles([...(e.target.files ?? [])]).then(() => (e.target.value = ""))} />
          </label>
          <label className="btn cursor-pointer">
            Choose a folder
            <input
              type="file"
              multiple
              className="sr-only"
              data-testid="choose-folder"
              disabled={Boolean(done)}
              {...({ webkitdirectory: "" } as Record<string, string>)}
              onChange={(e) => void addFiles([...(e.target.files ?? [])]).then(() => (e.target.value = ""))}
            />
          </label>
        </div>
      </div>

      {error ? (
        <p role="alert" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad" data-testid="upload-error">
          {error}
        </p>
      ) : null}

      {rows.length > 0 ? (
        <div className="card overflow-hidden">
          <div className="flex flex-wrap items-center gap-3 border-b border-line px-4 py-2 text-sm" data-testid="upload-summary">
            <span>
              Upload {sessionId} · {rows.length} files · {formatBytes(sentBytes)} of {formatBytes(totalBytes)}
            </span>
            <span className="text-ok">{count("accepted")} accepted</span>
            <span className="text-warn">{count("duplicate")} duplicates</span>
            <span className="text-bad">{count("refused")} refused</span>
            {count("interrupted") > 0 ? (
              <button type="button" className="btn" onClick={() => rows.filter((r) => r.state === "interrupted").forEach((r) => resume(r.key))} data-testid="resume-all">
                Resume {count("interrupted")} interrupted
              </button>
            ) : null}
          </div>
          <table className="w-full text-sm" data-testid="upload-files">
            <thead className="bg-ground text-left text-xs text-ink-soft">
              <tr>
                <th className="px-4 py-1.5 font-medium">File</th>
                <th className="px-2 py-1.5 font-medium">Size</th>
                <th className="w-1/4 px-2 py-1.5 font-medium">Progress</th>
                <th className="px-2 py-1.5 font-medium">Verdict</th>
                <th className="px-4 py-1.5 font-medium" />
              </tr>
            </thead>
            <tbody>
              {rows.map((r) => (
                <tr key={r.key} className="border-t border-line align-top" data-testid="upload-row" data-name={r.name} data-state={r.state} data-transfer={r.transferId ?? ""}>
                  <td className="px-4 py-1.5 font-mono text-xs whitespace-nowrap">{r.name}</td>
                  <td className="px-2 py-1.5 whitespace-nowrap">{formatBytes(r.size)}</td>
                  <td className="px-2 py-1.5">
                    <div className="h-2 rounded bg-ground" role="progressbar" aria-label={`${r.name} sent`} aria-valuemin={0} aria-valuemax={r.size} aria-valuenow={r.sent}>
                      <div className="h-2 rounded bg-accent" style={{ width: `${r.size ? Math.min(100, (100 * r.sent) / r.size) : 100}%` }} />
                    </div>
                  </td>
                  <td className="px-2 py-1.5">
                    <span className={`rounded px-1.5 py-0.5 text-xs ${STATE_CLASS[r.state]}`}>{STATE_WORDS[r.state]}</span>
                    {r.message ? (
                      <p className="mt-1 text-xs text-ink-soft" data-testid="upload-message">
                        {r.message}
                      </p>
                    ) : null}
                  </td>
                  <td className="px-4 py-1.5 text-right whitespace-nowrap">
                    {r.state === "sending" ? (
                      <button type="button" className="btn" onClick={() => pause(r.key)}>
                        Pause
                      </button>
                    ) : null}
                    {(r.state === "paused" || r.state === "interrupted") && r.local ? (
                      <button type="button" className="btn" onClick={() => resume(r.key)} data-testid="resume-file">
                        Resume
                      </button>
                    ) : null}
                  </td>
                </tr>
              ))}
            </tbody>
          </table>
        </div>
      ) : null}

      {sessionId !== null ? (
        <div className="card flex flex-wrap items-center gap-3 p-4 text-sm" data-testid="upload-complete-panel">
          {done ? (
            <p data-testid="upload-done">
              Upload complete: {done.files} files became dataset {done.datasetId}.{" "}
              {done.runId !== null ? (
                <>
                  Run{" "}
                  <Link className="text-accent underline" href={`/runs/${done.runId}`} data-testid="upload-run-link">
                    {done.runId}
                  </Link>{" "}
                  is queued with {pipeline ? `${pipeline.name} v${pipeline.version}` : "the profile's pipeline"}.
                </>
              ) : (
                "The profile has no pipeline yet; start a run on the dataset when one is saved."
              )}
            </p>
          ) : (
            <>
              <button type="button" className="btn-primary" disabled={completing || inFlight || count("accepted") === 0} onClick={() => void complete()} data-testid="complete-upload">
                {completing ? "Completing…" : "Mark upload complete"}
              </button>
              {stopped > 0 && !moving ? (
                <button type="button" className="btn" disabled={completing || count("accepted") === 0} onClick={() => void complete(true)} data-testid="complete-without-unfinished">
                  Complete without the {stopped} unfinished
                </button>
              ) : null}
              <span className="text-ink-soft">
                The {count("accepted")} accepted files become one dataset of {profile.surveyName} {profile.name}
                {pipeline ? `, processed with ${pipeline.name} v${pipeline.version}` : ""}. Refused and duplicate files are left out.
              </span>
            </>
          )}
        </div>
      ) : null}
    </section>
  );
}
