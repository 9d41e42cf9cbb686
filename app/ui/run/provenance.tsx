import Link from "next/link";
import type { RunView } from "@/app/lib/view-types";
import { DOOR_LABELS, formatReadable, formatSettingValue, formatTime, readableName, shortHash } from "@/app/ui/format";
import { StatusBadge } from "@/app/ui/status-badge";

/** Who made this result, from what and how: the auditor's view of one run. */
export function Provenance({ run, canExportAudit = false }: { run: RunView; canExportAudit?: boolean }) {
  const overrideEntries = Object.entries(run.overrides);
  return (
    <section className="card p-4 text-sm" aria-label="Where this result came from" data-testid="provenance">
      <h2 className="mb-2">Where this result came from</h2>
      <dl className="grid grid-cols-[auto_1fr] gap-x-3 gap-y-1 text-xs">
        <dt className="muted">Started by</dt>
        <dd>{run.startedBy}{run.startedByEmail ? ` (${run.startedByEmail})` : ""} via the {DOOR_LABELS[run.door]}</dd>
        <dt className="muted">Queued</dt><dd>{formatTime(run.createdAt)}</dd>
        <dt className="muted">Pipeline</dt><dd>{run.pipelineName}, version {run.pipelineVersion}</dd>
        <dt className="muted">Survey</dt><dd>{run.surveyName ?? "—"}{run.profileName ? `, line ${run.profileName}` : ""}</dd>
        <dt className="muted">Dataset</dt><dd>{run.datasetName}</dd>
        <dt className="muted">Dataset hash</dt><dd className="font-mono" title={run.datasetHash}>{shortHash(run.datasetHash)}</dd>
        <dt className="muted">Folder</dt><dd className="break-all font-mono">{run.datasetFolder}</dd>
      </dl>
      {run.parentChain.length ? (
        <div className="mt-3">
          <h3 className="text-xs font-semibold text-ink-soft">Rerun of</h3>
          <ol className="mt-1 space-y-1 text-xs" data-testid="parent-chain">
            {run.parentChain.map((p) => (
              <li key={p.id} className="flex items-center gap-2">
                <Link href={`/runs/${p.id}`} className="text-accent hover:underline">Run {p.id}</Link>
                <StatusBadge status={p.status} />
                <span className="muted">{p.startedBy} · {formatTime(p.createdAt)}</span>
              </li>
            ))}
          </ol>
        </div>
      ) : null}
      {overrideEntries.length ? (
        <div className="mt-3">
          <h3 className="text-xs font-semibold text-ink-soft">Changed settings{run.rerunFromStep ? ` (from step ${run.rerunFromStep})` : ""}</h3>
          <ul className="mt-1 space-y-0.5 font-mono text-xs" data-testid="overrides">
            {overrideEntries.flatMap(([label, params]) => Object.entries(params).map(([k, v]) => { const n = readableName(k); return <li key={`${label}.${k}`}>{label} · <span className="font-sans">{n.label}</span> = {Array.isArray(v) && v.some((x) => x !== null && typeof x === "object" && !Array.isArray(x)) ? formatReadable(v, n.unit) : formatSettingValue(v, n.unit)} <span className="text-[10px] text-ink-faint">{k}</span></li>; }))}
          </ul>
        </div>
      ) : null}
      {run.childRunIds.length ? (
        <p className="mt-3 text-xs">Reruns of this run: {run.childRunIds.map((id, i) => <span key={id}>{i ? ", " : ""}<Link className="text-accent hover:underline" href={`/runs/${id}`}>run {id}</Link></span>)}</p>
      ) : null}
      {run.rejectedFiles.length ? (
        <div className="mt-3">
          <h3 className="text-xs font-semibold text-warn">Files left out ({run.rejectedFiles.length})</h3>
          <ul className="mt-1 space-y-0.5 text-xs">{run.rejectedFiles.map((f) => <li key={f.name}><span className="font-mono">{f.name}</span>: {f.reason}</li>)}</ul>
        </div>
      ) : null}
      {canExportAudit ? (
        <p className="mt-3 flex flex-wrap items-center gap-2 text-xs" data-testid="audit-export">
          <span className="muted">Audit trail of this run:</span>
          <a className="btn py-0.5 text-xs" href={`/api/runs/${run.id}/audit-export?format=csv`} download>CSV</a>
          <a className="btn py-0.5 text-xs" href={`/api/runs/${run.id}/audit-export?format=json`} download>JSON</a>
          <Link className="text-accent hover:underline" href={`/audit?entityType=run&entityId=${run.id}`}>show</Link>
        </p>
      ) : null}
      <details className="mt-3 text-xs">
        <summary className="cursor-pointer text-ink-soft">Pipeline file as recorded</summary>
        <pre className="mt-2 max-h-64 overflow-auto rounded bg-ground p-2 font-mono">{run.pipelineSource}</pre>
      </details>
    </section>
  );
}
