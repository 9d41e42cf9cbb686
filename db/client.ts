/**
 * The database connection: one per process, opened on first use, migrated at start-up.
 * WAL mode and a busy timeout let the CLI, a watcher and the web server write at once.
 */
import fs from "node:fs";
import path from "node:path";
import Database from "better-sqlite3";
import { drizzle } from "drizzle-orm/better-sqlite3";
import { readMigrationFiles } from "drizzle-orm/migrator";
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
  // The busy timeout first: switching a new database to WAL takes a lock another opener may hold.
  sqlite.pragma("busy_timeout = 10000");
  sqlite.pragma("journal_mode = WAL");
  sqlite.pragma("foreign_keys = ON");
  sqlite.pragma("synchronous = NORMAL");
  const db = drizzle(sqlite, { schema }) as Db;
  migrateOnce(sqlite, migrationsDir());
  // A database written before the audit trail was a hash chain gets its chain started here.
  sealUnchainedAuditEvents(db);
  return db;
}

const MIGRATIONS_TABLE = "__drizzle_migrations";

/**
 * Applies the pending migrations as drizzle's migrator does (the same __drizzle_migrations table
 * and rows: a migration is pending when it is newer than the newest applied one), but reads what
 * is applied and applies the rest inside one transaction that takes the write lock at its start
 * (BEGIN IMMEDIATE). Drizzle's migrator reads before its (deferred) transaction, so processes
 * opening a database that needs a migration at the same moment (the control room, a watcher and
 * a command after an upgrade) each applied it and all but one failed ("table already exists", or
 * SQLITE_BUSY on a stale snapshot). Now one migrates and the others wait for it and find nothing
 * left to do. Nothing pending (every open but the first after an upgrade): no write lock is taken.
 */
export function migrateOnce(sqlite: Database.Database, migrationsFolder: string): void {
  const migrations = readMigrationFiles({ migrationsFolder });
  const newest = migrations.reduce((m, x) => Math.max(m, x.folderMillis), -Infinity);
  const newestApplied = (): number | null => {
    const exists = sqlite.prepare("select 1 from sqlite_master where type = 'table' and name = ?").get(MIGRATIONS_TABLE);
    if (!exists) return null;
    const row = sqlite.prepare(`select created_at from "${MIGRATIONS_TABLE}" order by created_at desc limit 1`).get() as { created_at: number | string } | undefined;
    return row ? Number(row.created_at) : null;
  };
  const before = newestApplied();
  if (before !== null && before >= newest) return;
  sqlite
    .transaction(() => {
      sqlite.exec(`create table if not exists "${MIGRATIONS_TABLE}" (id SERIAL PRIMARY KEY, hash text NOT NULL, created_at numeric)`);
      const applied = newestApplied();
      const record = sqlite.prepare(`insert into "${MIGRATIONS_TABLE}" ("hash", "created_at") values (?, ?)`);
      for (const m of migrations) {
        if (applied !== null && applied >= m.folderMillis) continue;
        for (const statement of m.sql) sqlite.exec(statement);
        record.run(m.hash, m.folderMillis);
      }
    })
    .immediate();
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
