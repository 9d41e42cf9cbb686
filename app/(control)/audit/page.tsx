import type { Metadata } from "next";
import Link from "next/link";
import { getDb } from "@/db/client";
import { searchAudit, type AuditEventRow } from "@/db/queries/audit-search";
import { verifyAuditChain, type ChainVerdict } from "@/db/queries/audit-chain";
import { AUDIT_PAGE_SIZE, auditFilterSchema, toAuditSearch } from "@/app/lib/audit-filter";
import { pageUserWith } from "@/app/lib/page-user";
import { DOOR_LABELS, formatReadable, formatTime, readableName } from "@/app/ui/format";

export const metadata: Metadata = { title: "Audit trail" };
export const dynamic = "force-dynamic";

function parse(json: string | null): unknown {
  if (json === null) return undefined;
  try {
    return JSON.parse(json);
  } catch {
    return json;
  }
}

/** Before and after as readable rows: one row per recorded field, changed fields marked. */
function BeforeAfter({ e }: { e: AuditEventRow }) {
  const before = parse(e.beforeJson);
  const after = parse(e.afterJson);
  const isObj = (v: unknown): v is Record<string, unknown> => typeof v === "object" && v !== null && !Array.isArray(v);
  if (!isObj(before) && !isObj(after)) {
    return (
      <div className="text-xs">
        {before !== undefined ? <div><span className="muted">before:</span> {formatReadable(before)}</div> : null}
        {after !== undefined ? <div><span className="muted">after:</span> {formatReadable(after)}</div> : null}
      </div>
    );
  }
  const b = isObj(before) ? before : {};
  const a = isObj(after) ? after : {};
  const keys = [...new Set([...Object.keys(b), ...Object.keys(a)])];
  return (
    <dl className="grid grid-cols-[auto_1fr] gap-x-2 text-xs" data-testid="before-after">
      {keys.map((k) => {
        const { words, unit } = readableName(k);
        const inB = k in b;
        const inA = k in a;
        const changed = inB && inA && JSON.stringify(b[k]) !== JSON.stringify(a[k]);
        return (
          <div key={k} className="contents">
            <dt className="muted" title={k}>{words}</dt>
            <dd className="break-words">
              {inB && inA ? (
                changed ? <><span className="line-through decoration-ink-faint">{formatReadable(b[k], unit)}</span> → <span className="font-medium">{formatReadable(a[k], unit)}</span></> : formatReadable(a[k], unit)
              ) : inA ? formatReadable(a[k], unit) : <><span className="muted">was</span> {formatReadable(b[k], unit)}</>}
            </dd>
          </div>
        );
      })}
    </dl>
  );
}

/** The verdict of the chain check over the whole trail (db/queries/audit-chain.ts), at every page view. */
function ChainPanel({ v }: { v: ChainVerdict }) {
  return (
    <section
      className={`card p-3 text-sm ${v.ok ? "border-ok/40" : "border-bad bg-bad-soft"}`}
      aria-label="Hash chain check"
      data-testid="audit-chain"
      data-intact={v.ok ? "yes" : "no"}
    >
      {v.ok ? (
        <p className="text-ok"><span className="font-medium">Intact.</span> All {v.checked} event{v.checked === 1 ? "" : "s"} checked just now: each holds the SHA-256 hash of its own contents and of the event before it, so none has been changed, inserted or removed since it was written.</p>
      ) : (
        <p role="alert" className="text-bad">
          <span className="font-medium">Broken at event {v.firstBroken!.id}.</span> {v.firstBroken!.reason}. Events from there on cannot be vouched for; {v.checked} checked.
        </p>
      )}
      <p className="mt-1 text-xs muted">
        Chain head: event {v.headId}, <span className="font-mono break-all">{v.headHash}</span>. Keep it outside Tracewright (a report, an e-mail);{" "}
        <span className="font-mono">tracewright audit verify --expect-head {v.headId}:…</span> later shows whether the trail was rewritten up to it.
        {v.chainStart ? ` Events up to ${v.chainStart.sealedThroughId} were written before the chain existed and sealed at event ${v.chainStart.markerId}.` : ""}
      </p>
    </section>
  );
}

function recordOf(e: AuditEventRow) {
  if (e.entityType === "run") return <Link className="text-accent hover:underline" href={`/runs/${e.entityId}`}>Run {e.entityId}</Link>;
  if (e.entityType === "user") return <span>{e.entityName ?? `person ${e.entityId}`}<span className="block text-[10px] muted">account {e.entityId}</span></span>;
  return `${e.entityType} ${e.entityId}`;
}

export default async function AuditPage({ searchParams }: { searchParams: Promise<Record<string, string | string[] | undefined>> }) {
  await pageUserWith("audit.read");
  const raw = Object.fromEntries(Object.entries(await searchParams).map(([k, v]) => [k, Array.isArray(v) ? v[0] : v]));
  const parsed = auditFilterSchema.safeParse(raw);
  const filter = parsed.success ? parsed.data : auditFilterSchema.parse({});
  const { rows: events, total } = searchAudit(getDb(), toAuditSearch(filter));
  const chain = verifyAuditChain(getDb());
  const pages = Math.max(1, Math.ceil(total / AUDIT_PAGE_SIZE));
  const pageLink = (page: number) => {
    const q = new URLSearchParams(Object.entries({ ...raw, page: String(page) }).filter(([, v]) => v) as Array<[string, string]>);
    return `/audit?${q}`;
  };
  const oneRun = filter.entityType === "run" && filter.entityId && /^\d+$/.test(filter.entityId) ? filter.entityId : null;
  return (
    <div className="space-y-4">
      <div>
        <h1>Audit trail</h1>
        <p className="text-ink-soft">Who did what, when, through which door, with the before and after. Nothing here can be changed or removed without the check below finding it.</p>
      </div>
      <ChainPanel v={chain} />
      {!parsed.success ? <p role="alert" className="rounded-md bg-warn-soft px-3 py-2 text-sm text-warn">Filter ignored: {parsed.error.issues[0]?.message}</p> : null}
      <form key={JSON.stringify(raw)} className="card grid grid-cols-2 gap-3 p-3 md:grid-cols-6" aria-label="Filter the audit trail">
        <label className="label">Action (or its start)<input name="action" defaultValue={filter.action ?? ""} className="field mt-1" placeholder="e.g. review, run.rerun" /></label>
        <label className="label">Person<input name="person" defaultValue={filter.person ?? ""} className="field mt-1" placeholder="name or e-mail" /></label>
        <label className="label">Record type<input name="entityType" defaultValue={filter.entityType ?? ""} className="field mt-1" placeholder="run, user, …" /></label>
        <label className="label">Record id<input name="entityId" defaultValue={filter.entityId ?? ""} className="field mt-1" /></label>
        <label className="label">From day<input type="date" name="from" defaultValue={filter.from ?? ""} className="field mt-1" /></label>
        <label className="label">To day<input type="date" name="to" defaultValue={filter.to ?? ""} className="field mt-1" /></label>
        <div className="col-span-full flex flex-wrap items-center gap-2">
          <button className="btn-primary">Apply</button>
          <Link href="/audit" className="btn">Clear</Link>
          {oneRun ? (
            <span className="ml-auto flex items-center gap-2 text-xs" data-testid="audit-export">
              Export run {oneRun}&apos;s trail:
              <a className="btn py-0.5 text-xs" href={`/api/runs/${oneRun}/audit-export?format=csv`} download>CSV</a>
              <a className="btn py-0.5 text-xs" href={`/api/runs/${oneRun}/audit-export?format=json`} download>JSON</a>
            </span>
          ) : (
            <span className="ml-auto text-xs muted">To export one run&apos;s trail, filter on record type “run” and its id, or use the run page.</span>
          )}
        </div>
      </form>
      <div className="card overflow-x-auto">
        <table className="w-full min-w-[900px] text-sm" data-testid="audit-table">
          <thead className="bg-ground text-left text-xs text-ink-soft">
            <tr><th className="px-3 py-2 font-medium">When</th><th className="px-3 py-2 font-medium">Who</th><th className="px-3 py-2 font-medium">Action</th><th className="px-3 py-2 font-medium">Record</th><th className="px-3 py-2 font-medium">Before → after</th></tr>
          </thead>
          <tbody>
            {events.length === 0 ? <tr><td colSpan={5} className="px-3 py-8 text-center muted">{filter.page > pages ? `There is no page ${filter.page}: ${total} events make ${pages} page${pages === 1 ? "" : "s"}.` : "No events match."}</td></tr> : null}
            {events.map((e) => (
              <tr key={e.id} className="border-t border-line align-top">
                <td className="whitespace-nowrap px-3 py-2 tabular-nums">{formatTime(e.at.getTime())}</td>
                <td className="px-3 py-2">
                  {e.actorName ?? e.actorLabel}
                  <div className="text-xs muted">via the {DOOR_LABELS[e.door]}{e.actorName && e.actorName !== e.actorLabel ? ` · recorded as ${e.actorLabel}` : ""}</div>
                </td>
                <td className="px-3 py-2 font-mono text-xs">{e.action}</td>
                <td className="px-3 py-2">{recordOf(e)}</td>
                <td className="px-3 py-2"><BeforeAfter e={e} /></td>
              </tr>
            ))}
          </tbody>
        </table>
      </div>
      <nav className="flex items-center justify-between gap-2 text-sm" aria-label="Pages">
        <span className="muted" data-testid="audit-count">{total} event{total === 1 ? "" : "s"}{filter.page <= pages ? ` · page ${filter.page} of ${pages}` : ""}</span>
        <div className="flex gap-2">
          {filter.page > 1 ? <Link className="btn" href={pageLink(Math.min(filter.page - 1, pages))}>Newer</Link> : null}
          {filter.page < pages ? <Link className="btn" href={pageLink(filter.page + 1)}>Older</Link> : null}
        </div>
      </nav>
    </div>
  );
}
