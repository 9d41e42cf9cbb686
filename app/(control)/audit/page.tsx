import type { Metadata } from "next";
import Link from "next/link";
import { getDb } from "@/db/client";
import { listAudit } from "@/db/queries/audit";
import { AUDIT_PAGE_SIZE, auditFilterSchema, toAuditDbFilter } from "@/app/lib/audit-filter";
import { pageUserWith } from "@/app/lib/page-user";
import { DOOR_LABELS, formatTime } from "@/app/ui/format";

export const metadata: Metadata = { title: "Audit trail" };
export const dynamic = "force-dynamic";

function brief(json: string | null): string {
  if (!json) return "";
  const text = json.length > 160 ? json.slice(0, 157) + "…" : json;
  return text;
}

export default async function AuditPage({ searchParams }: { searchParams: Promise<Record<string, string | string[] | undefined>> }) {
  await pageUserWith("audit.read");
  const raw = Object.fromEntries(Object.entries(await searchParams).map(([k, v]) => [k, Array.isArray(v) ? v[0] : v]));
  const parsed = auditFilterSchema.safeParse(raw);
  const filter = parsed.success ? parsed.data : auditFilterSchema.parse({});
  const rows = listAudit(getDb(), toAuditDbFilter(filter));
  const events = rows.slice(0, AUDIT_PAGE_SIZE);
  const more = rows.length > AUDIT_PAGE_SIZE;
  const pageLink = (page: number) => {
    const q = new URLSearchParams(Object.entries({ ...raw, page: String(page) }).filter(([, v]) => v) as Array<[string, string]>);
    return `/audit?${q}`;
  };
  return (
    <div className="space-y-4">
      <div>
        <h1>Audit trail</h1>
        <p className="text-ink-soft">Who did what, when, through which door, with the before and after. Nothing here can be changed or removed.</p>
      </div>
      {!parsed.success ? <p role="alert" className="rounded-md bg-warn-soft px-3 py-2 text-sm text-warn">Filter ignored: {parsed.error.issues[0]?.message}</p> : null}
      <form className="card grid grid-cols-2 gap-3 p-3 md:grid-cols-6" aria-label="Filter the audit trail">
        <label className="label">Action<input name="action" defaultValue={filter.action ?? ""} className="field mt-1" placeholder="e.g. run.rerun" /></label>
        <label className="label">Person<input name="person" defaultValue={filter.person ?? ""} className="field mt-1" /></label>
        <label className="label">Record type<input name="entityType" defaultValue={filter.entityType ?? ""} className="field mt-1" placeholder="run, user, …" /></label>
        <label className="label">Record id<input name="entityId" defaultValue={filter.entityId ?? ""} className="field mt-1" /></label>
        <label className="label">From day<input type="date" name="from" defaultValue={filter.from ?? ""} className="field mt-1" /></label>
        <label className="label">To day<input type="date" name="to" defaultValue={filter.to ?? ""} className="field mt-1" /></label>
        <div className="col-span-full flex gap-2"><button className="btn-primary">Apply</button><Link href="/audit" className="btn">Clear</Link></div>
      </form>
      <div className="card overflow-x-auto">
        <table className="w-full min-w-[900px] text-sm" data-testid="audit-table">
          <thead className="bg-ground text-left text-xs text-ink-soft">
            <tr><th className="px-3 py-2 font-medium">When</th><th className="px-3 py-2 font-medium">Who</th><th className="px-3 py-2 font-medium">Action</th><th className="px-3 py-2 font-medium">Record</th><th className="px-3 py-2 font-medium">Before → after</th></tr>
          </thead>
          <tbody>
            {events.length === 0 ? <tr><td colSpan={5} className="px-3 py-8 text-center muted">No events match.</td></tr> : null}
            {events.map((e) => (
              <tr key={e.id} className="border-t border-line align-top">
                <td className="whitespace-nowrap px-3 py-2 tabular-nums">{formatTime(e.at.getTime())}</td>
                <td className="px-3 py-2">{e.actorLabel}<div className="text-xs muted">via {DOOR_LABELS[e.door]}</div></td>
                <td className="px-3 py-2 font-mono text-xs">{e.action}</td>
                <td className="px-3 py-2">{e.entityType === "run" ? <Link className="text-accent hover:underline" href={`/runs/${e.entityId}`}>run {e.entityId}</Link> : `${e.entityType} ${e.entityId}`}</td>
                <td className="px-3 py-2 font-mono text-xs text-ink-soft">{e.beforeJson ? <div>before: {brief(e.beforeJson)}</div> : null}{e.afterJson ? <div>after: {brief(e.afterJson)}</div> : null}</td>
              </tr>
            ))}
          </tbody>
        </table>
      </div>
      <nav className="flex justify-end gap-2 text-sm" aria-label="Pages">
        {filter.page > 1 ? <Link className="btn" href={pageLink(filter.page - 1)}>Newer</Link> : null}
        {more ? <Link className="btn" href={pageLink(filter.page + 1)}>Older</Link> : null}
      </nav>
    </div>
  );
}
