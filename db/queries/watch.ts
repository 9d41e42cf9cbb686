/** Watched folders and what the watcher saw. */
import { eq } from "drizzle-orm";
import type { Db } from "../client";
import { watchEvents, watchedFolders } from "../schema";

export type WatchedFolderRow = typeof watchedFolders.$inferSelect;
export type WatchEventName = (typeof watchEvents.$inferInsert)["event"];

/** The record of a watched folder, created on first sight. */
export function ensureWatchedFolder(db: Db, folderPath: string, pipelinePath: string): WatchedFolderRow {
  return (
    db.select().from(watchedFolders).where(eq(watchedFolders.folderPath, folderPath)).get() ??
    db.insert(watchedFolders).values({ folderPath, pipelinePath }).returning().get()
  );
}

/** Records something the watcher decided about a folder (or one of its files). */
export function recordWatchEvent(db: Db, e: { folderId: number; event: WatchEventName; reason: string; file?: string; runId?: number }): void {
  db.insert(watchEvents)
    .values({ folderId: e.folderId, event: e.event, reason: e.reason, file: e.file ?? null, runId: e.runId ?? null, at: new Date() })
    .run();
}

/** A folder whose last finished run had this key (content hash and pipeline version), if any. */
export function findFolderWithKey(db: Db, key: string): WatchedFolderRow | undefined {
  return db.select().from(watchedFolders).where(eq(watchedFolders.lastContentHash, key)).get();
}

/** Records a folder's latest run, and its key when that run succeeded. */
export function recordFolderRun(db: Db, folderId: number, r: { lastContentHash: string | null; lastRunId: number }): void {
  db.update(watchedFolders)
    .set({ lastContentHash: r.lastContentHash, lastRunId: r.lastRunId, updatedAt: new Date() })
    .where(eq(watchedFolders.id, folderId))
    .run();
}
