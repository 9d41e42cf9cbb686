/**
 * Watched folders: a watcher looks after a root folder; every folder of field files below it
 * (the root itself or one level down) runs the pipeline once its files have stopped changing
 * for a quiet period. Half-copied files are never read (chokidar's write-finish detection), the
 * same content runs once (content hashes, remembered in SQLite across restarts), and ignored
 * or rejected files are recorded with the reason.
 */
import path from "node:path";
import fs from "node:fs";
import { watch, type FSWatcher } from "chokidar";
import { eq } from "drizzle-orm";
import type { Db } from "../db/client";
import { watchEvents, watchedFolders } from "../db/schema";
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
  /** Quiet period after the last change before a folder runs, ms. @default 3000 */
  quietMs?: number;
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

function folderRow(db: Db, folderPath: string, pipelinePath: string) {
  let row = db.select().from(watchedFolders).where(eq(watchedFolders.folderPath, folderPath)).get();
  row ??= db.insert(watchedFolders).values({ folderPath, pipelinePath }).returning().get();
  return row;
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
  const quietMs = opts.quietMs ?? 3000;
  const timers = new Map<string, NodeJS.Timeout>();
  const queue: string[] = [];
  let running: Promise<void> | null = null;
  let closed = false;
  const idleWaiters: Array<() => void> = [];

  const note = (folder: string, event: (typeof watchEvents.$inferInsert)["event"], reason: string, file?: string, runId?: number) => {
    const row = folderRow(db, folder, pipelinePath);
    db.insert(watchEvents).values({ folderId: row.id, event, reason, file: file ?? null, runId: runId ?? null, at: new Date() }).run();
    opts.onNotice?.({ folder, event, file, reason, runId });
  };

  const checkIdle = () => {
    if (!running && queue.length === 0 && timers.size === 0) idleWaiters.splice(0).forEach((r) => r());
  };

  const processFolder = async (folder: string) => {
    const row = folderRow(db, folder, pipelinePath);
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
      const seen = db.select().from(watchedFolders).all().find((f) => f.lastContentHash === key);
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
    const outcome = await executeRun(db, runId, { pool: opts.pool, events: opts.runEvents, signal: stopping.signal });
    // Only a finished run counts as done: a failed or cancelled one is tried again when the
    // folder or the pipeline changes, or the watcher restarts.
    db.update(watchedFolders)
      .set({ lastContentHash: outcome.status === "succeeded" ? key : row.lastContentHash, lastRunId: runId, updatedAt: new Date() })
      .where(eq(watchedFolders.id, row.id))
      .run();
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

  const schedule = (folder: string) => {
    clearTimeout(timers.get(folder));
    timers.set(
      folder,
      setTimeout(() => {
        timers.delete(folder);
        if (!queue.includes(folder)) queue.push(folder);
        pump();
      }, quietMs),
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
