import { z } from "zod";

const empty = (v: unknown) => (v === "" || v === null ? undefined : v);

/** Filter of the audit trail as URL search parameters. */
export const auditFilterSchema = z.object({
  action: z.preprocess(empty, z.string().max(100).optional()),
  person: z.preprocess(empty, z.string().max(200).optional()),
  entityType: z.preprocess(empty, z.string().max(50).optional()),
  entityId: z.preprocess(empty, z.string().max(50).optional()),
  from: z.preprocess(empty, z.string().regex(/^\d{4}-\d{2}-\d{2}$/, "expected a date like 2025-11-14").optional()),
  to: z.preprocess(empty, z.string().regex(/^\d{4}-\d{2}-\d{2}$/, "expected a date like 2025-11-14").optional()),
  page: z.preprocess(empty, z.coerce.number().int().min(1).default(1)),
});
export type AuditFilterParams = z.output<typeof auditFilterSchema>;

export const AUDIT_PAGE_SIZE = 50;

/** The db filter for parsed params. */
export function toAuditDbFilter(p: AuditFilterParams) {
  return {
    action: p.action,
    actorLabel: p.person,
    entityType: p.entityType,
    entityId: p.entityId,
    from: p.from ? new Date(`${p.from}T00:00:00`) : undefined,
    to: p.to ? new Date(`${p.to}T23:59:59.999`) : undefined,
    limit: AUDIT_PAGE_SIZE + 1,
    offset: (p.page - 1) * AUDIT_PAGE_SIZE,
  };
}

/** The search of db/queries/audit-search.ts for parsed params: action by prefix, person by name, e-mail or label; one page. */
export function toAuditSearch(p: AuditFilterParams) {
  return {
    action: p.action,
    person: p.person,
    entityType: p.entityType,
    entityId: p.entityId,
    from: p.from ? new Date(`${p.from}T00:00:00`) : undefined,
    to: p.to ? new Date(`${p.to}T23:59:59.999`) : undefined,
    limit: AUDIT_PAGE_SIZE,
    offset: (p.page - 1) * AUDIT_PAGE_SIZE,
  };
}
