/**
 * Opening one database from several processes at once (the control room, a watcher and a command
 * starting after an upgrade): the migrations are applied once, whoever comes second waits for the
 * first and finds nothing left to do. SQLite's locking as documented: BEGIN IMMEDIATE takes the
 * write lock at once and waits for it under the busy timeout (sqlite.org/lang_transaction.html);
 * a deferred transaction that read before another process committed cannot write
 * (SQLITE_BUSY_SNAPSHOT, sqlite.org/rescode.html#busy_snapshot).
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { execa } from "execa";
import { readMigrationFiles } from "drizzle-orm/migrator";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { openDatabase } from "../../db/client";
import { migrationsDir, projectRoot } from "../../db/paths";
import { listAudit } from "../../db/queries/audit";

let tmp: string;
beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-open-"));
});
afterAll(() => fs.rmSync(tmp, { recursive: true, force: true }));

const fixture = (name: string) => path.join(projectRoot, "tests", "fixtures", "db", name);
const migrationCount = () => readMigrationFiles({ migrationsFolder: migrationsDir() }).length;

describe("opening a database that another process is migrating", () => {
  it("waits for that migration and applies nothing twice", async () => {
    const file = path.join(tmp, "during-migration.db");
    const child = execa(process.execPath, ["--import", "tsx", fixture("slow-migrator.ts"), file, "1500"], { cwd: projectRoot, reject: false, all: true });
    await new Promise<void>((resolve, reject) => {
      child.stdout?.on("data", (b: Buffer) => b.toString().includes("migrating") && resolve());
      child.catch(reject);
      void child.then((r) => reject(new Error(`the migrating process ended first: ${r.all}`)));
    });
    // The other process holds the write lock with every migration applied but not committed.
    const db = openDatabase(file);
    const r = await child;
    expect(r.exitCode, String(r.all)).toBe(0);
    const rows = db.$client.prepare(`select hash, created_at from "__drizzle_migrations"`).all();
    expect(rows).toHaveLength(migrationCount());
    expect(db.$client.pragma("integrity_check", { simple: true })).toBe("ok");
    db.$client.close();
  });

  it("three processes opening a new database at the same moment all start, and each migration is applied once", async () => {
    const file = path.join(tmp, "at-once.db");
    const startAt = Date.now() + 5000;
    const results = await Promise.all(
      [0, 1, 2].map((i) => execa(process.execPath, ["--import", "tsx", fixture("open-at-once.ts"), file, `opener-${i}`, String(startAt)], { cwd: projectRoot, reject: false, all: true })),
    );
    for (const r of results) expect(r.exitCode, String(r.all)).toBe(0);
    const db = openDatabase(file);
    expect(db.$client.prepare(`select count(*) as n from "__drizzle_migrations"`).get()).toEqual({ n: migrationCount() });
    expect(listAudit(db, { action: "test.open" }).map((e) => e.actorLabel).sort()).toEqual(["opener-0", "opener-1", "opener-2"]);
    db.$client.close();
  });
});
