/**
 * Watched folders: a watcher looks after a root folder; every folder of field files below it
 * (the root itself or one level down) runs the pipeline once it is complete:
 *   - a marker file the crew drops (`READY` by default) is there, or
 *   - every file the geometry table names (its `file` column) is there,
 * each followed by a short settle time (`settleMs`), or else once nothing changed in it for the
 * quiet period (`quietMs`, long enough for a slow USB copy). Half-copied files are never read
 * (chokidar's write-finish detection), the same content runs once (content hashes, remembered in
 * SQLite across restarts), and ignored or rejected files are recorded with the reason. When a
 * folder that already ran changes (it was not complete after all), its earlier run is recorded
 * as superseded by the new one.
 */
import path from "node:path";
import fs from "node:fs";
import { watch, type FSWatcher } from "chokidar";
import type { Db } from "../db/client";
import { ensureWatchedFolder, findFolderWithKey, recordFolderRun, recordWatchEvent, type WatchEventName } from "../db/queries/watch";
import { getRun } from "../db/queries/runs";
import { isIgnoredName, scanFolder } from "./dataset-folder";
import { toAppError } from "./errors";
import { loadPipelineFile } from "./pipeline-file";
import { createRun, registerPipelineAndDataset } from "./run-create";
import { executeRun, type Actor, type RunEvents, type RunOutcome } from "./runner";
import type { WorkerPool } from "./workers/pool";

export interface WatchOptions {
  /** Root folder to watch. */
  root: string;
  /** Pipeline file run on each field folder. */
  pipelinePath: string;
  /** Quiet period after the last change before an incomplete-looking folder runs, ms. @default 120000 */
  quietMs?: number;
  /** Settle time once a folder is complete (marker present, or every file of its geometry table), ms. @default 3000 */
  settleMs?: number;
  /** Name of the marker file that says a folder is complete. @default "READY" */
  readyMarker?: string;
  /** How long a file's size must hold still before it counts as written, ms. @default 1000 */
  writeFinishMs?: number;
  /** Use polling (network shares). @default false */
  usePolling?: boolean;
  actor: Actor;
  pool?: WorkerPool;
  /** Called for everything the watcher decides, for the terminal. */
  onNotice?: (n: { folder: string; event: string; file?: string; reason: string; runId?: number }) => void;
  /** Run events of runs the watcher starts. */
  runEvents?: RunEvents;
  /** Called after each run the watcher finishes. */
  onRunFinished?: (o: RunOutcome & { folder: string }) => void;
}

export interface FolderWatcher {
  /** Resolves when the initial scan is done. */
  ready: Promise<void>;
  /** Resolves when no run is going and none is waiting. */
  idle(): Promise<void>;
  close(): Promise<void>;
}

/** The file names in the `file` column of a geometry table, or null when it cannot be read. */
function filesNamedByTable(table: string): string[] | null {
  let text: string;
  try {
    text = fs.readFileSync(table, "utf8");
  } catch {
    return null;
  }
  const lines = text.split(/\r?\n/).filter((l) => l.trim() !== "" && !l.trimStart().startsWith("#"));
  if (lines.length < 2) return null;
  const header = lines[0].split(",").map((h) => h.trim().toLowerCase());
  const col = header.indexOf("file");
  if (col < 0) return null;
  return [...new Set(lines.slice(1).map((l) => (l.split(",")[col] ?? "").trim()).filter((f) => f !== ""))];
}

/** Starts watching. Runs execute one at a time in this process. */
export function watchFieldFolders(db: Db, opts: WatchOptions): FolderWatcher {
  const root = path.resolve(opts.root);
  if (!fs.existsSync(root) || !fs.statSync(root).isDirectory()) {
    throw toAppError(Object.assign(new Error(`Watched folder ${root} does not exist or is not a folder`), { name: "StepInputError" }));
  }
  const pipelinePath = path.resolve(opts.pipelinePath);
  // A broken pipeline file is refused now, not once per folder later.
  loadPipelineFile(pipelinePath);
  const stopping = new AbortController();
  const quietMs = opts.quietMs ?? 120_000;
  const settleMs = Math.min(opts.settleMs ?? 3000, quietMs);
  const marker = opts.readyMarker ?? "READY";
  const tableName = (() => {
    const t = loadPipelineFile(pipelinePath).resolved.geometryTablePath;
    return t ? { name: path.basename(t), path: t } : null;
  })();
  const timers = new Map<string, NodeJS.Timeout>();
  const queue: string[] = [];
  let running: Promise<void> | null = null;
  let closed = false;
  const idleWaiters: Array<() => void> = [];

  const note = (folder: string, event: WatchEventName, reason: string, file?: string, runId?: number) => {
    const row = ensureWatchedFolder(db, folder, pipelinePath);
    recordWatchEvent(db, { folderId: row.id, event, reason, file, runId });
    opts.onNotice?.({ folder, event, file, reason, runId });
  };

  const checkIdle = () => {
    if (!running && queue.length === 0 && timers.size === 0) idleWaiters.splice(0).forEach((r) => r());
  };

  const processFolder = async (folder: string) => {
    const row = ensureWatchedFolder(db, folder, pipelinePath);
    let scanned;
    try {
      scanned = scanFolder(folder);
    } catch (err) {
      note(folder, "rejected", toAppError(err).message);
      return;
    }
    if (scanned.files.length === 0) return;
    let runId: number;
    let key: string;
    try {
      // What was done is remembered per (folder content, pipeline version): the same content
      // runs once per pipeline, and a changed pipeline runs again.
      const reg = registerPipelineAndDataset(db, { pipelinePath, fieldDataOverride: folder, actor: opts.actor });
      key = `${reg.dataset.contentHash}:${reg.pipelineVersionId}`;
      const seen = findFolderWithKey(db, key);
      if (seen) {
        note(
          folder,
          "run-skipped",
          `same content (${scanned.contentHash.slice(0, 12)}) and pipeline as ${seen.folderPath === folder ? "this folder's" : `${seen.folderPath}'s`} run ${seen.lastRunId ?? "?"}`,
          undefined,
          seen.lastRunId ?? undefined,
        );
        return;
      }
      runId = createRun(db, { source: "registration", registration: reg, actor: opts.actor }).runId;
    } catch (err) {
      note(folder, "rejected", toAppError(err).message);
      return;
    }
    note(folder, "run-started", `${scanned.files.length} files, content ${scanned.contentHash.slice(0, 12)}`, undefined, runId);
    if (row.lastRunId !== null && row.lastRunId !== runId) {
      // The folder changed after its last run: that run saw it incomplete (or outdated).
      note(folder, "superseded", `run ${row.lastRunId} saw this folder before it changed; superseded by run ${runId}`, undefined, row.lastRunId);
    }
    const outcome = await executeRun(db, runId, { pool: opts.pool, events: opts.runEvents, signal: stopping.signal });
    // Only a finished run counts as done: a failed or cancelled one is tried again when the
    // folder or the pipeline changes, or the watcher restarts.
    recordFolderRun(db, row.id, { lastContentHash: outcome.status === "succeeded" ? key : row.lastContentHash, lastRunId: runId });
    if (outcome.status !== "succeeded") note(folder, "rejected", `run ${runId} ${outcome.status}: ${outcome.error ?? ""}`, undefined, runId);
    for (const f of getRun(db, runId)?.rejectedFiles ?? []) note(folder, "rejected", f.reason, f.name, runId);
    opts.onRunFinished?.({ ...outcome, folder });
  };

  const pump = () => {
    if (running || closed) return;
    const next = queue.shift();
    if (!next) {
      checkIdle();
      return;
    }
    running = processFolder(next)
      .catch((err) => note(next, "rejected", toAppError(err).message))
      .finally(() => {
        running = null;
        pump();
      });
  };

  /** Complete: the marker is there, or every file the geometry table names is. */
  const isComplete = (folder: string): boolean => {
    if (fs.existsSync(path.join(folder, marker))) return true;
    if (!tableName) return false;
    const local = path.join(folder, tableName.name);
    const named = filesNamedByTable(fs.existsSync(local) ? local : tableName.path);
    return named !== null && named.length > 0 && named.every((f) => fs.existsSync(path.join(folder, f)));
  };

  const schedule = (folder: string) => {
    clearTimeout(timers.get(folder));
    timers.set(
      folder,
      setTimeout(
        () => {
          timers.delete(folder);
          if (!queue.includes(folder)) queue.push(folder);
          pump();
        },
        isComplete(folder) ? settleMs : quietMs,
      ),
    );
  };

  const watcher: FSWatcher = watch(root, {
    depth: 1,
    ignoreInitial: false,
    usePolling: opts.usePolling ?? false,
    awaitWriteFinish: { stabilityThreshold: opts.writeFinishMs ?? 1000, pollInterval: 100 },
    // Hidden folders (editor and sync tool state) are skipped; hidden files are recorded as ignored below.
    ignored: (p: string, stats?: fs.Stats) => p !== root && Boolean(stats?.isDirectory()) && path.basename(p).startsWith("."),
  });

  const onFile = (file: string) => {
    const name = path.basename(file);
    const folder = path.dirname(file);
    if (name === marker) {
      schedule(folder);
      return;
    }
    if (isIgnoredName(name)) {
      note(folder, "ignored", "hidden or partial file name", name);
      return;
    }
    schedule(folder);
  };
  watcher.on("add", onFile);
  watcher.on("change", onFile);
  watcher.on("unlink", (file) => schedule(path.dirname(file)));
  watcher.on("error", (err) => opts.onNotice?.({ folder: root, event: "error", reason: String((err as Error)?.message ?? err) }));

  const ready = new Promise<void>((resolve) => watcher.once("ready", () => resolve()));

  return {
    ready,
    idle: () =>
      new Promise<void>((resolve) => {
        idleWaiters.push(resolve);
        checkIdle();
      }),
    async close() {
      closed = true;
      stopping.abort();
      for (const t of timers.values()) clearTimeout(t);
      timers.clear();
      await watcher.close();
      await running;
    },
  };
}
