/**
 * The database connection: one per process, opened on first use, migrated at start-up.
 * WAL mode and a busy timeout let the CLI, a watcher and the web server write at once.
 */
import fs from "node:fs";
import path from "node:path";
import Database from "better-sqlite3";
import { drizzle } from "drizzle-orm/better-sqlite3";
import { migrate } from "drizzle-orm/better-sqlite3/migrator";
import * as schema from "./schema";
import { databasePath, migrationsDir } from "./paths";
import { sealUnchainedAuditEvents } from "./queries/audit-chain";
import type { Db } from "./db-type";

export type { Db };

let shared: Db | undefined;

/** Opens (and migrates) a database at `file`; ":memory:" for tests. */
export function openDatabase(file: string): Db {
  if (file !== ":memory:") fs.mkdirSync(path.dirname(file), { recursive: true });
  const sqlite = new Database(file);
  sqlite.pragma("journal_mode = WAL");
  sqlite.pragma("busy_timeout = 10000");
  sqlite.pragma("foreign_keys = ON");
  sqlite.pragma("synchronous = NORMAL");
  const db = drizzle(sqlite, { schema }) as Db;
  migrate(db, { migrationsFolder: migrationsDir() });
  // A database written before the audit trail was a hash chain gets its chain started here.
  sealUnchainedAuditEvents(db);
  return db;
}

/** The process-wide database at TRACEWRIGHT_DB (default ./data/tracewright.db). */
export function getDb(): Db {
  shared ??= openDatabase(databasePath());
  return shared;
}

/** Closes the process-wide connection (CLI exit, tests). */
export function closeDb(): void {
  if (shared) {
    shared.$client.close();
    shared = undefined;
  }
}

/**
 * Runs `fn` in a write transaction that takes the write lock at its start (BEGIN IMMEDIATE).
 * A deferred transaction that reads and then writes fails with SQLITE_BUSY when another process
 * wrote in between (the busy timeout cannot help a lock upgrade), so every transaction that
 * writes goes through here.
 */
export function writeTransaction<T>(db: Db, fn: (tx: Db) => T): T {
  return db.transaction((tx) => fn(tx as unknown as Db), { behavior: "immediate" });
}
