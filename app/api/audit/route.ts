import { NextResponse } from "next/server";
import { getDb } from "@/db/client";
import { listAudit } from "@/db/queries/audit";
import { answer, parseOr400 } from "@/app/lib/api";
import { AUDIT_PAGE_SIZE, auditFilterSchema, toAuditDbFilter } from "@/app/lib/audit-filter";
import { requirePermission } from "@/app/lib/session";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/** GET /api/audit: audit events, newest first, filtered. */
export async function GET(req: Request) {
  return answer(async () => {
    await requirePermission("audit.read");
    const q = parseOr400(auditFilterSchema, Object.fromEntries(new URL(req.url).searchParams), "query");
    const rows = listAudit(getDb(), toAuditDbFilter(q));
    return NextResponse.json({
      events: rows.slice(0, AUDIT_PAGE_SIZE).map((e) => ({ ...e, at: e.at.getTime() })),
      hasMore: rows.length > AUDIT_PAGE_SIZE,
      page: q.page,
    });
  });
}
