/**
 * The audit trail as a hash chain (db/queries/audit-chain.ts): the construction of Schneier &
 * Kelsey (1999, ACM TISSEC 2(2)) and Crosby & Wallach (2009, USENIX Security §2), each event
 * hashing its fields with the hash of the event before. Hashes are checked against GNU
 * coreutils' sha256sum (FIPS 180-4 SHA-256) of the serialisation documented in the module, so a
 * change of the serialisation or of the hash fails here. Edits and removals are made directly
 * in SQLite, as someone with the database file could.
 */
import { execFileSync } from "node:child_process";
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import Database from "better-sqlite3";
import { execa } from "execa";
import { afterEach, beforeEach, describe, expect, it } from "vitest";
import { openDatabase, type Db } from "../../db/client";
import { recordAudit } from "../../db/queries/audit";
import { CHAIN_GENESIS, CHAIN_START_ACTION, verifyAuditChain } from "../../db/queries/audit-chain";

const actor = { userId: null, label: "tester", door: "cli" as const };
let tmp: string;
let file: string;
let db: Db;

function record(n: number, from = 0): void {
  for (let i = from; i < from + n; i++) recordAudit(db, { actor, action: "run.start", entityType: "run", entityId: i + 1, before: { status: "queued" }, after: { status: "running", i } });
}

/** A second, plain connection: what someone editing the file with sqlite3 would do. */
function raw(fn: (s: Database.Database) => void): void {
  const s = new Database(file);
  try {
    fn(s);
  } finally {
    s.close();
  }
}

beforeEach(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-audit-"));
  file = path.join(tmp, "tracewright.db");
  db = openDatabase(file);
});

afterEach(() => {
  db.$client.close();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("audit hash chain", () => {
  it("gives each event the SHA-256 of the documented serialisation, linked to the one before", () => {
    record(3);
    const rows = db.$client.prepare("select * from audit_events order by id").all() as Array<Record<string, string | number | null>>;
    let prev = CHAIN_GENESIS;
    for (const r of rows) {
      // The serialisation written out by hand from the module's documentation.
      const text = JSON.stringify(["tracewright-audit-event/1", prev, r.id, r.at, r.actor_user_id, r.actor_label, r.door, r.action, r.entity_type, r.entity_id, r.before_json, r.after_json]);
      const reference = execFileSync("sha256sum", { input: Buffer.from(text, "utf8") }).toString().split(" ")[0];
      expect(r.prev_hash).toBe(prev);
      expect(r.hash).toBe(reference);
      prev = reference;
    }
    expect(rows).toHaveLength(3);
  });

  it("passes on a fresh database and after many events", () => {
    expect(verifyAuditChain(db)).toMatchObject({ ok: true, checked: 0, headId: 0 });
    record(25);
    const v = verifyAuditChain(db);
    expect(v).toMatchObject({ ok: true, checked: 25, headId: 25 });
    expect(v.firstBroken).toBeUndefined();
  });

  it("names the event whose row was edited directly in SQLite", () => {
    record(6);
    raw((s) => s.prepare("update audit_events set after_json = ? where id = 4").run(JSON.stringify({ status: "succeeded", i: 3 })));
    const v = verifyAuditChain(db);
    expect(v.ok).toBe(false);
    expect(v.firstBroken?.id).toBe(4);
    expect(v.firstBroken?.reason).toMatch(/changed after it was written/);
  });

  it("catches an edit whose own hash was recomputed at the next event's link", () => {
    record(5);
    raw((s) => {
      s.prepare("update audit_events set actor_label = 'someone else' where id = 2").run();
      // Recompute event 2's hash as the module would, leaving event 3 linking to the old one.
      const r = s.prepare("select * from audit_events where id = 2").get() as Record<string, string | number | null>;
      const text = JSON.stringify(["tracewright-audit-event/1", r.prev_hash, r.id, r.at, r.actor_user_id, r.actor_label, r.door, r.action, r.entity_type, r.entity_id, r.before_json, r.after_json]);
      const h = execFileSync("sha256sum", { input: Buffer.from(text, "utf8") }).toString().split(" ")[0];
      s.prepare("update audit_events set hash = ? where id = 2").run(h);
    });
    const v = verifyAuditChain(db);
    expect(v.firstBroken).toMatchObject({ id: 3 });
    expect(v.firstBroken?.reason).toMatch(/does not link to event 2/);
  });

  it("finds a deleted event in the middle and at the end", () => {
    record(5);
    raw((s) => s.prepare("delete from audit_events where id = 3").run());
    let v = verifyAuditChain(db);
    expect(v.ok).toBe(false);
    expect(v.firstBroken?.id).toBe(4);
    expect(v.firstBroken?.reason).toMatch(/event 3 is missing/);

    const tail = path.join(tmp, "tail.db");
    const other = openDatabase(tail);
    recordAudit(other, { actor, action: "user.add", entityType: "user", entityId: 1 });
    recordAudit(other, { actor, action: "user.add", entityType: "user", entityId: 2 });
    other.$client.prepare("delete from audit_events where id = 2").run();
    v = verifyAuditChain(other);
    expect(v.firstBroken).toMatchObject({ id: 2 });
    expect(v.firstBroken?.reason).toMatch(/last one written, is missing/);
    other.$client.close();
  });

  it("catches a whole rewrite against a kept head, and passes against the right one", () => {
    record(4);
    const kept = verifyAuditChain(db);
    record(2, 4);
    expect(verifyAuditChain(db, { expectHead: { id: kept.headId, hash: kept.headHash } }).ok).toBe(true);
    // Rewrite event 2 and every hash after it, as someone who knows the construction could.
    raw((s) => {
      s.prepare("update audit_events set after_json = '{}' where id = 2").run();
      const rows = s.prepare("select * from audit_events order by id").all() as Array<Record<string, string | number | null>>;
      let prev = CHAIN_GENESIS;
      for (const r of rows) {
        const text = JSON.stringify(["tracewright-audit-event/1", prev, r.id, r.at, r.actor_user_id, r.actor_label, r.door, r.action, r.entity_type, r.entity_id, r.before_json, r.after_json]);
        const h = execFileSync("sha256sum", { input: Buffer.from(text, "utf8") }).toString().split(" ")[0];
        s.prepare("update audit_events set prev_hash = ?, hash = ? where id = ?").run(prev, h, r.id);
        prev = h;
      }
    });
    expect(verifyAuditChain(db).ok).toBe(true); // the chain alone cannot tell (module comment)
    const v = verifyAuditChain(db, { expectHead: { id: kept.headId, hash: kept.headHash } });
    expect(v.firstBroken).toMatchObject({ id: 4 });
  });

  it("does not fork when two processes write the same database at once", async () => {
    const writer = path.resolve(import.meta.dirname, "../fixtures/db/audit-writer.ts");
    const startAt = Date.now() + 4000;
    const count = 400;
    await Promise.all(
      ["writer-a", "writer-b"].map((label) => execa("node", ["--import", "tsx", writer, file, label, String(count), String(startAt)], { cwd: path.resolve(import.meta.dirname, "../..") })),
    );
    const v = verifyAuditChain(db);
    expect(v).toMatchObject({ ok: true, checked: 2 * count });
    const rows = db.$client.prepare("select actor_label as who, prev_hash as prev from audit_events order by id").all() as Array<{ who: string; prev: string }>;
    // Every link is used once (a fork would give two events the same previous hash) ...
    expect(new Set(rows.map((r) => r.prev)).size).toBe(rows.length);
    // ... and the writers really did interleave.
    const switches = rows.filter((r, i) => i > 0 && r.who !== rows[i - 1].who).length;
    expect(switches).toBeGreaterThan(1);
  });

  it("has one way in: nothing outside the chain module inserts audit events", () => {
    const root = path.resolve(import.meta.dirname, "../..");
    const offenders: string[] = [];
    const walk = (dir: string) => {
      for (const e of fs.readdirSync(dir, { withFileTypes: true })) {
        const p = path.join(dir, e.name);
        if (e.isDirectory()) walk(p);
        else if (/\.(ts|tsx|mjs)$/.test(e.name) && p !== path.join(root, "db", "queries", "audit-chain.ts")) {
          if (/insert\(\s*auditEvents\s*\)|insert\s+into\s+[`"']?audit_events/i.test(fs.readFileSync(p, "utf8"))) offenders.push(path.relative(root, p));
        }
      }
    };
    for (const d of ["app", "cli", "db", "pipeline", "scripts", "examples"]) walk(path.join(root, d));
    expect(offenders).toEqual([]);
  });

  it("starts the chain in a database written before it, and never seals an erased hash again", () => {
    record(3);
    db.$client.close();
    // As the database was before the chain: no hashes.
    raw((s) => s.prepare("update audit_events set prev_hash = null, hash = null").run());
    db = openDatabase(file);
    let v = verifyAuditChain(db);
    expect(v).toMatchObject({ ok: true, checked: 4, chainStart: { markerId: 4, sealedThroughId: 3 } });
    const marker = db.$client.prepare("select action, after_json from audit_events where id = 4").get() as { action: string; after_json: string };
    expect(marker.action).toBe(CHAIN_START_ACTION);
    record(1, 3);
    db.$client.close();
    raw((s) => s.prepare("update audit_events set hash = null where id = 2").run());
    db = openDatabase(file);
    v = verifyAuditChain(db);
    expect(v.firstBroken?.id).toBe(2);
    expect(v.firstBroken?.reason).toMatch(/no hash/);
  });
});
