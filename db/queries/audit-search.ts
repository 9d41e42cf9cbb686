/**
 * Reading the audit trail for people: action by prefix ("review" finds review.approve and
 * review.return), a person by name or label, names of the people behind user ids (the actor
 * and, for user records, the person the record is about), a total for paging, and every
 * event of one run for export.
 */
import { aliasedTable, and, asc, desc, eq, gte, like, lte, or, sql, type SQL } from "drizzle-orm";
import type { Db } from "../client";
import { auditEvents, users } from "../schema";

export interface AuditSearch {
  /** Action or its prefix: "review" matches "review.approve"; "run.rerun" matches itself. */
  action?: string;
  /** Name, e-mail or recorded label of the actor. */
  person?: string;
  entityType?: string;
  entityId?: string;
  from?: Date;
  to?: Date;
  limit?: number;
  offset?: number;
}

export interface AuditEventRow {
  id: number;
  at: Date;
  actorUserId: number | null;
  actorLabel: string;
  /** The actor's current name when the event names a user, else null. */
  actorName: string | null;
  door: "cli" | "web" | "watcher";
  action: string;
  entityType: string;
  entityId: string;
  /** For records of type "user": that person's name. */
  entityName: string | null;
  beforeJson: string | null;
  afterJson: string | null;
}

const escapeLike = (s: string) => s.replace(/[\\%_]/g, (c) => `\\${c}`);

function conditions(f: AuditSearch, actor: typeof users): SQL | undefined {
  const where: SQL[] = [];
  if (f.action) {
    const a = f.action.trim();
    where.push(or(eq(auditEvents.action, a), sql`${auditEvents.action} like ${escapeLike(a.replace(/\.$/, "")) + ".%"} escape '\\'`)!);
  }
  if (f.person) {
    const p = f.person.trim();
    where.push(or(eq(auditEvents.actorLabel, p), eq(actor.name, p), eq(actor.email, p.toLowerCase()), like(actor.name, `%${escapeLike(p)}%`))!);
  }
  if (f.entityType) where.push(eq(auditEvents.entityType, f.entityType));
  if (f.entityId) where.push(eq(auditEvents.entityId, f.entityId));
  if (f.from) where.push(gte(auditEvents.at, f.from));
  if (f.to) where.push(lte(auditEvents.at, f.to));
  return where.length ? and(...where) : undefined;
}

function select(db: Db) {
  const actor = aliasedTable(users, "actor");
  const subject = aliasedTable(users, "subject");
  const q = db
    .select({
      id: auditEvents.id,
      at: auditEvents.at,
      actorUserId: auditEvents.actorUserId,
      actorLabel: auditEvents.actorLabel,
      actorName: actor.name,
      door: auditEvents.door,
      action: auditEvents.action,
      entityType: auditEvents.entityType,
      entityId: auditEvents.entityId,
      entityName: subject.name,
      beforeJson: auditEvents.beforeJson,
      afterJson: auditEvents.afterJson,
    })
    .from(auditEvents)
    .leftJoin(actor, eq(actor.id, auditEvents.actorUserId))
    .leftJoin(subject, and(eq(auditEvents.entityType, "user"), eq(sql`cast(${subject.id} as text)`, auditEvents.entityId)));
  return { q, actor };
}

/** A page of events, newest first, and how many match in all. */
export function searchAudit(db: Db, f: AuditSearch = {}): { rows: AuditEventRow[]; total: number } {
  const { q, actor } = select(db);
  const cond = conditions(f, actor);
  const rows = q
    .where(cond)
    .orderBy(desc(auditEvents.id))
    .limit(f.limit ?? 50)
    .offset(f.offset ?? 0)
    .all() as AuditEventRow[];
  const totalRow = db
    .select({ n: sql<number>`count(*)` })
    .from(auditEvents)
    .leftJoin(actor, eq(actor.id, auditEvents.actorUserId))
    .where(cond)
    .get();
  return { rows, total: Number(totalRow?.n ?? 0) };
}

/** Every event about one run, oldest first (for the run's audit export). */
export function runAuditTrail(db: Db, runId: number): AuditEventRow[] {
  const { q } = select(db);
  return q
    .where(and(eq(auditEvents.entityType, "run"), eq(auditEvents.entityId, String(runId))))
    .orderBy(asc(auditEvents.id))
    .all() as AuditEventRow[];
}
