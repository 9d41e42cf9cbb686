/**
 * A run's audit trail as a file for the auditor: CSV (RFC 4180: comma-separated, CRLF line
 * ends, fields with a comma, quote or line break in double quotes, quotes doubled) or JSON.
 * Times in UTC, ISO 8601. People by name (with the label recorded at the time when it differs).
 * Each event carries its place in the audit hash chain (db/queries/audit-chain.ts): the hash of
 * the event before it and its own; the JSON also gives the exact text hashed, so an event can be
 * checked with any SHA-256 tool, and the verdict of the whole chain at export time.
 */
import type { AuditEventRow } from "@/db/queries/audit-search";

export interface AuditExportEvent {
  id: number;
  at: string;
  who: string;
  recordedAs: string;
  door: string;
  action: string;
  recordType: string;
  recordId: string;
  recordName: string | null;
  before: unknown;
  after: unknown;
  /** Hash of the event before this one in the whole trail (64 zeros for the first). */
  prevHash: string | null;
  /** SHA-256 of `hashedText`. */
  hash: string | null;
}

/** The chain data of one event (db/queries/audit-chain.ts chainRecords). */
export interface ChainRecord {
  prevHash: string | null;
  hash: string | null;
  text: string | null;
}

const parse = (json: string | null): unknown => {
  if (json === null) return null;
  try {
    return JSON.parse(json);
  } catch {
    return json;
  }
};

/** The events as plain objects (before/after parsed), with their chain hashes when given. */
export function toExportEvents(rows: AuditEventRow[], chain: Map<number, ChainRecord> = new Map()): AuditExportEvent[] {
  return rows.map((r) => ({
    id: r.id,
    at: r.at.toISOString(),
    who: r.actorName ?? r.actorLabel,
    recordedAs: r.actorLabel,
    door: r.door,
    action: r.action,
    recordType: r.entityType,
    recordId: r.entityId,
    recordName: r.entityName,
    before: parse(r.beforeJson),
    after: parse(r.afterJson),
    prevHash: chain.get(r.id)?.prevHash ?? null,
    hash: chain.get(r.id)?.hash ?? null,
  }));
}

/** One CSV field per RFC 4180 section 2. */
export function csvField(v: unknown): string {
  const s = v === null || v === undefined ? "" : typeof v === "string" ? v : JSON.stringify(v);
  return /[",\r\n]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
}

const COLUMNS: Array<[keyof AuditExportEvent, string]> = [
  ["id", "event"],
  ["at", "when_utc"],
  ["who", "who"],
  ["recordedAs", "recorded_as"],
  ["door", "door"],
  ["action", "action"],
  ["recordType", "record_type"],
  ["recordId", "record_id"],
  ["recordName", "record_name"],
  ["before", "before"],
  ["after", "after"],
  ["prevHash", "prev_hash"],
  ["hash", "hash"],
];

/** The events as CSV text with a header row. */
export function auditCsv(events: AuditExportEvent[]): string {
  const lines = [COLUMNS.map(([, h]) => h).join(",")];
  for (const e of events) lines.push(COLUMNS.map(([k]) => csvField(e[k])).join(","));
  return lines.join("\r\n") + "\r\n";
}
