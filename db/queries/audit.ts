/** Audit trail: append-only records of who did what, through which door, with before and after. */
import { and, desc, eq, gte, lte, type SQL } from "drizzle-orm";
import type { Db } from "../client";
import { auditEvents, type Door } from "../schema";
import { appendAuditEvent } from "./audit-chain";

/** Who acts: a known user, or a label (OS user on the CLI, "watcher"), and the door. */
export interface Actor {
  userId: number | null;
  label: string;
  door: Door;
}

/**
 * Records one event: the only way anything writes the audit trail. Each event is linked into the
 * hash chain (db/queries/audit-chain.ts) in the same transaction that inserts it.
 */
export function recordAudit(
  db: Db,
  e: { actor: Actor; action: string; entityType: string; entityId: string | number; before?: unknown; after?: unknown },
): void {
  appendAuditEvent(db, {
    actorUserId: e.actor.userId,
    actorLabel: e.actor.label,
    door: e.actor.door,
    action: e.action,
    entityType: e.entityType,
    entityId: String(e.entityId),
    beforeJson: e.before === undefined ? null : JSON.stringify(e.before),
    afterJson: e.after === undefined ? null : JSON.stringify(e.after),
  });
}

export interface AuditFilter {
  entityType?: string;
  entityId?: string;
  action?: string;
  actorLabel?: string;
  from?: Date;
  to?: Date;
  limit?: number;
  offset?: number;
}

export function listAudit(db: Db, f: AuditFilter = {}) {
  const where: SQL[] = [];
  if (f.entityType) where.push(eq(auditEvents.entityType, f.entityType));
  if (f.entityId) where.push(eq(auditEvents.entityId, f.entityId));
  if (f.action) where.push(eq(auditEvents.action, f.action));
  if (f.actorLabel) where.push(eq(auditEvents.actorLabel, f.actorLabel));
  if (f.from) where.push(gte(auditEvents.at, f.from));
  if (f.to) where.push(lte(auditEvents.at, f.to));
  return db
    .select()
    .from(auditEvents)
    .where(where.length ? and(...where) : undefined)
    .orderBy(desc(auditEvents.id))
    .limit(f.limit ?? 200)
    .offset(f.offset ?? 0)
    .all();
}
