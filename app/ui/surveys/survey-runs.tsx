import Link from "next/link";
import type { SurveyRunRow } from "@/db/queries/surveys";
import { StatusBadge } from "@/app/ui/status-badge";
import { formatTime } from "@/app/ui/format";

/** The runs of a survey or a profile, newest first, with their review decision. */
export function SurveyRuns({ runs, showProfile = true }: { runs: SurveyRunRow[]; showProfile?: boolean }) {
  if (runs.length === 0) return <p className="px-4 py-3 text-sm muted">No runs yet.</p>;
  return (
    <table className="w-full text-sm" data-testid="survey-runs">
      <thead className="bg-ground text-left text-xs text-ink-soft">
        <tr>
          <th className="px-4 py-2 font-medium">Run</th>
          <th className="px-4 py-2 font-medium">Pipeline</th>
          {showProfile ? <th className="px-4 py-2 font-medium">Profile</th> : null}
          <th className="px-4 py-2 font-medium">State</th>
          <th className="px-4 py-2 font-medium">Review</th>
          <th className="px-4 py-2 font-medium">Started by</th>
          <th className="px-4 py-2 font-medium">Created</th>
        </tr>
      </thead>
      <tbody>
        {runs.map((r) => (
          <tr key={r.id} className="border-t border-line">
            <td className="px-4 py-2"><Link className="text-accent hover:underline" href={`/runs/${r.id}`}>#{r.id}</Link></td>
            <td className="px-4 py-2">{r.pipelineName}</td>
            {showProfile ? <td className="px-4 py-2">{r.profileName ?? "—"}</td> : null}
            <td className="px-4 py-2"><StatusBadge status={r.status} /></td>
            <td className="px-4 py-2">{r.review === "approved" ? <span className="text-ok">Approved</span> : r.review === "returned" ? <span className="text-warn">Sent back</span> : <span className="muted">—</span>}</td>
            <td className="px-4 py-2">{r.startedByLabel}</td>
            <td className="px-4 py-2 text-ink-soft">{formatTime(r.createdAt.getTime())}</td>
          </tr>
        ))}
      </tbody>
    </table>
  );
}

/** "12.5 MB". */
export function formatBytes(n: number): string {
  if (n < 1024) return `${n} B`;
  if (n < 1024 ** 2) return `${(n / 1024).toFixed(1)} KB`;
  if (n < 1024 ** 3) return `${(n / 1024 ** 2).toFixed(1)} MB`;
  return `${(n / 1024 ** 3).toFixed(2)} GB`;
}

/** A profile's ends in its stated coordinate reference, or a dash. */
export function formatEnds(p: { crs: string; startX: number | null; startY: number | null; endX: number | null; endY: number | null }): string {
  if (p.startX === null || p.startY === null || p.endX === null || p.endY === null) return "—";
  return `(${p.startX}, ${p.startY}) → (${p.endX}, ${p.endY})${p.crs ? ` in ${p.crs}` : ""}`;
}
