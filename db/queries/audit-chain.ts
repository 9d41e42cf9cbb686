/**
 * The audit trail as a hash chain: every event stores the hash of the event before it
 * (`prev_hash`) and its own hash, SHA-256 over a canonical serialisation of its fields and
 * `prev_hash`. Changing, inserting or removing an event in the middle breaks the link at that
 * event or at the next one, and `verifyAuditChain` names the first broken link.
 *
 * The construction is the hash chain of tamper-evident logs: Schneier & Kelsey (1999), "Secure
 * audit logs to support computer forensics", ACM TISSEC 2(2), 159–176 (each entry's hash chain
 * value Y_j = H(Y_{j-1}, E_j, ...)), as analysed by Crosby & Wallach (2009), "Efficient data
 * structures for tamper-evident logging", USENIX Security, §2 (the linear hash chain). We use
 * no secret key (Schneier & Kelsey add an evolving MAC key): anyone who can write the database
 * and recompute every later hash can rewrite history undetected. The chain head (`headHash`)
 * printed by `tracewright audit verify` is the commitment an auditor keeps elsewhere; comparing
 * it later (`--expect-head`) detects such a rewrite and a truncated tail (Crosby & Wallach §2.1).
 *
 * Event hash (version 1), hex SHA-256 of the UTF-8 JSON text of the array
 *   ["tracewright-audit-event/1", prev_hash, id, at, actor_user_id, actor_label, door, action,
 *    entity_type, entity_id, before_json, after_json]
 * with the column values exactly as stored (at: integer milliseconds; nulls as null). The first
 * event's prev_hash is 64 zeros.
 */
import { createHash } from "node:crypto";
import { sql } from "drizzle-orm";
import type { Db } from "../db-type";
import { auditEvents, type Door } from "../schema";

/** prev_hash of the first event. */
export const CHAIN_GENESIS = "0".repeat(64);
/** The action of the event that marks where an old database's chain was started. */
export const CHAIN_START_ACTION = "audit.chain-start";
const HASH_VERSION = "tracewright-audit-event/1";

/** An event's columns as stored, the input of its hash. */
export interface ChainedFields {
  id: number;
  at: number;
  actorUserId: number | null;
  actorLabel: string;
  door: string;
  action: string;
  entityType: string;
  entityId: string;
  beforeJson: string | null;
  afterJson: string | null;
}

/** The canonical text hashed for one event (see the module comment). */
export function canonicalEvent(prevHash: string, f: ChainedFields): string {
  return JSON.stringify([
    HASH_VERSION,
    prevHash,
    f.id,
    f.at,
    f.actorUserId,
    f.actorLabel,
    f.door,
    f.action,
    f.entityType,
    f.entityId,
    f.beforeJson,
    f.afterJson,
  ]);
}

/** SHA-256 (hex) of one event given the hash before it. */
export function eventHash(prevHash: string, f: ChainedFields): string {
  return createHash("sha256").update(canonicalEvent(prevHash, f), "utf8").digest("hex");
}

interface RawRow {
  id: number;
  at: number;
  actor_user_id: number | null;
  actor_label: string;
  door: string;
  action: string;
  entity_type: string;
  entity_id: string;
  before_json: string | null;
  after_json: string | null;
  prev_hash: string | null;
  hash: string | null;
}

const fieldsOf = (r: RawRow): ChainedFields => ({
  id: r.id,
  at: r.at,
  actorUserId: r.actor_user_id,
  actorLabel: r.actor_label,
  door: r.door,
  action: r.action,
  entityType: r.entity_type,
  entityId: r.entity_id,
  beforeJson: r.before_json,
  afterJson: r.after_json,
});

/** The highest id the table ever handed out (AUTOINCREMENT keeps it in sqlite_sequence, even after deletes). */
function highestIssuedId(db: Db): number {
  const seq = db.get<{ seq: number } | undefined>(sql`select seq from sqlite_sequence where name = 'audit_events'`);
  const max = db.get<{ id: number | null }>(sql`select max(id) as id from audit_events`);
  return Math.max(Number(seq?.seq ?? 0), Number(max?.id ?? 0));
}

/** What an event says, before it has an id and a place in the chain. */
export interface NewAuditEvent {
  actorUserId: number | null;
  actorLabel: string;
  door: Door;
  action: string;
  entityType: string;
  entityId: string;
  beforeJson: string | null;
  afterJson: string | null;
}

/**
 * Appends one event to the chain. Reading the last hash and inserting happen in one write
 * transaction that takes SQLite's write lock at its start (BEGIN IMMEDIATE; a savepoint when the
 * caller is already inside a transaction, whose lock then covers both), so two processes writing
 * the same database cannot both link to the same previous event. The only insert into
 * audit_events; `recordAudit` (db/queries/audit.ts) is its door.
 */
export function appendAuditEvent(db: Db, e: NewAuditEvent, at: Date = new Date()): { id: number; hash: string } {
  return db.transaction(
    (tx) => {
      const t = tx as unknown as Db;
      const last = t.get<{ hash: string | null } | undefined>(sql`select hash from audit_events order by id desc limit 1`);
      const prevHash = last ? (last.hash ?? CHAIN_GENESIS) : CHAIN_GENESIS;
      const id = highestIssuedId(t) + 1;
      const fields: ChainedFields = { id, at: at.getTime(), ...e };
      const hash = eventHash(prevHash, fields);
      t.insert(auditEvents)
        .values({ ...e, id, at: new Date(fields.at), prevHash, hash })
        .run();
      return { id, hash };
    },
    { behavior: "immediate" },
  );
}

/** Where the chain breaks first, and why. */
export interface ChainBreak {
  /** The event at which the check failed (for a removed event: the one after the gap). */
  id: number;
  reason: string;
}

export interface ChainVerdict {
  ok: boolean;
  /** Events checked (all of them, in id order). */
  checked: number;
  firstBroken?: ChainBreak;
  /** Hash of the last event: the value to keep elsewhere and compare later. */
  headHash: string;
  /** Id of the last event (0 when there is none). */
  headId: number;
  /** For a database whose earlier events were sealed when the chain was introduced. */
  chainStart?: { markerId: number; sealedThroughId: number };
}

/**
 * Checks the whole chain: each event's hash against its fields, each `prev_hash` against the
 * event before, ids without gaps, and no event removed from the end (the table's AUTOINCREMENT
 * counter). With `expectHead` (an id and hash kept from an earlier check) also that the event is
 * still there with that hash: this catches a rewrite that recomputed every later hash.
 */
export function verifyAuditChain(db: Db, opts: { expectHead?: { id: number; hash: string } } = {}): ChainVerdict {
  const rows = db.all<RawRow>(
    sql`select id, at, actor_user_id, actor_label, door, action, entity_type, entity_id, before_json, after_json, prev_hash, hash from audit_events order by id`,
  );
  let expectedPrev = CHAIN_GENESIS;
  let lastId = 0;
  let checked = 0;
  let chainStart: ChainVerdict["chainStart"];
  let firstBroken: ChainBreak | undefined;
  const byId = new Map<number, string | null>();
  for (const r of rows) {
    checked++;
    byId.set(r.id, r.hash);
    if (!firstBroken) {
      if (r.id !== lastId + 1) {
        const gap = r.id - lastId - 1;
        firstBroken = {
          id: r.id,
          reason: gap === 1 ? `event ${lastId + 1} is missing (removed) before event ${r.id}` : `events ${lastId + 1} to ${r.id - 1} are missing (removed) before event ${r.id}`,
        };
      } else if (r.hash === null || r.prev_hash === null) {
        firstBroken = { id: r.id, reason: `event ${r.id} has no ${r.hash === null ? "hash" : "link to the event before"}: it was written outside the audit trail or its hash was erased` };
      } else if (r.prev_hash !== expectedPrev) {
        firstBroken = {
          id: r.id,
          reason: lastId === 0 ? `event ${r.id} is the first but does not link to the start of the chain` : `event ${r.id} does not link to event ${lastId}: event ${lastId} or this link was changed`,
        };
      } else if (eventHash(r.prev_hash, fieldsOf(r)) !== r.hash) {
        firstBroken = { id: r.id, reason: `event ${r.id} was changed after it was written: its fields no longer give its hash` };
      }
    }
    if (r.action === CHAIN_START_ACTION && !chainStart) {
      try {
        const after = JSON.parse(r.after_json ?? "{}") as { sealedThroughId?: number };
        chainStart = { markerId: r.id, sealedThroughId: Number(after.sealedThroughId ?? 0) };
      } catch {
        chainStart = { markerId: r.id, sealedThroughId: 0 };
      }
    }
    expectedPrev = r.hash ?? "";
    lastId = r.id;
  }
  const issued = highestIssuedId(db);
  if (!firstBroken && issued > lastId) {
    firstBroken = {
      id: lastId + 1,
      reason: issued === lastId + 1 ? `event ${issued}, the last one written, is missing (removed)` : `events ${lastId + 1} to ${issued}, the last ones written, are missing (removed)`,
    };
  }
  if (!firstBroken && opts.expectHead) {
    const { id, hash } = opts.expectHead;
    const found = byId.get(id);
    if (found === undefined) firstBroken = { id, reason: `the kept head event ${id} is no longer in the trail` };
    else if (found !== hash) firstBroken = { id, reason: `event ${id} no longer has the kept hash ${hash.slice(0, 12)}…: the trail was rewritten up to or past it` };
  }
  return { ok: !firstBroken, checked, ...(firstBroken ? { firstBroken } : {}), headHash: rows.length ? (rows[rows.length - 1].hash ?? "") : CHAIN_GENESIS, headId: lastId, ...(chainStart ? { chainStart } : {}) };
}

/**
 * Starts the chain in a database written before it existed: when events are there and none has a
 * hash yet, links them in id order as they stand now and appends a chain-start event saying
 * through which event they were sealed (nothing vouches for them before that moment). Runs when
 * the database is opened; does nothing once any event has a hash, so an event whose hash is
 * erased later stays a broken link instead of being sealed again.
 */
export function sealUnchainedAuditEvents(db: Db): { sealed: number } {
  const needs = () =>
    db.get<{ n: number }>(sql`select (exists(select 1 from audit_events where hash is null) and not exists(select 1 from audit_events where hash is not null)) as n`);
  if (!needs()?.n) return { sealed: 0 };
  return db.transaction(
    (tx) => {
      const t = tx as unknown as Db;
      if (!needs()?.n) return { sealed: 0 };
      const rows = t.all<RawRow>(
        sql`select id, at, actor_user_id, actor_label, door, action, entity_type, entity_id, before_json, after_json, prev_hash, hash from audit_events order by id`,
      );
      let prev = CHAIN_GENESIS;
      for (const r of rows) {
        const hash = eventHash(prev, fieldsOf(r));
        t.run(sql`update audit_events set prev_hash = ${prev}, hash = ${hash} where id = ${r.id}`);
        prev = hash;
      }
      const through = rows[rows.length - 1].id;
      appendAuditEvent(t, {
        actorUserId: null,
        actorLabel: "tracewright",
        door: "cli",
        action: CHAIN_START_ACTION,
        entityType: "audit",
        entityId: "chain",
        beforeJson: null,
        afterJson: JSON.stringify({ sealedEvents: rows.length, sealedThroughId: through }),
      });
      return { sealed: rows.length };
    },
    { behavior: "immediate" },
  );
}

/**
 * For exported events: each event's links and the exact text its hash is taken over, so anyone
 * can check an exported event with any SHA-256 tool (sha256 of `text` = `hash`).
 */
export function chainRecords(db: Db, ids: number[]): Map<number, { prevHash: string | null; hash: string | null; text: string | null }> {
  const out = new Map<number, { prevHash: string | null; hash: string | null; text: string | null }>();
  const chunk = 500;
  for (let i = 0; i < ids.length; i += chunk) {
    const part = ids.slice(i, i + chunk);
    const rows = db.all<RawRow>(
      sql`select id, at, actor_user_id, actor_label, door, action, entity_type, entity_id, before_json, after_json, prev_hash, hash from audit_events where id in (${sql.join(part.map((id) => sql`${id}`), sql`, `)})`,
    );
    for (const r of rows) out.set(r.id, { prevHash: r.prev_hash, hash: r.hash, text: r.prev_hash === null ? null : canonicalEvent(r.prev_hash, fieldsOf(r)) });
  }
  return out;
}
