/** A run's shot tasks on the job queue, one row per task (step, batch, shot). */
import type { ShotTaskRow } from "@/pipeline/workers/shot-queue";

const STATE_WORDS: Record<string, string> = {
  completed: "done",
  active: "running",
  waiting: "waiting",
  delayed: "waiting to retry",
  prioritized: "waiting",
  failed: "failed",
};

export function ShotTaskTable({ rows }: { rows: ShotTaskRow[] }) {
  return (
    <section className="card overflow-hidden" aria-label="Shot tasks">
      <div className="px-4 pt-3">
        <h2>Shot tasks on the job queue</h2>
        <p className="text-xs muted">One row per shot of each batch (stage start, line-search evaluation, final synthetics). Tries counts failed tries; stalls counts workers that stopped under the task.</p>
      </div>
      <table className="mt-2 w-full text-sm" data-testid="shot-tasks">
        <thead className="bg-ground text-left text-xs text-ink-soft">
          <tr>
            <th className="px-4 py-2 font-medium">Step</th>
            <th className="px-4 py-2 font-medium">Batch</th>
            <th className="px-4 py-2 font-medium">Shot</th>
            <th className="px-4 py-2 font-medium">State</th>
            <th className="px-4 py-2 text-right font-medium">Tries</th>
            <th className="px-4 py-2 text-right font-medium">Stalls</th>
            <th className="px-4 py-2 font-medium">Worker</th>
            <th className="px-4 py-2 text-right font-medium">Compute</th>
          </tr>
        </thead>
        <tbody>
          {rows.map((r) => (
            <tr key={r.jobId} className="border-t border-line">
              <td className="px-4 py-1.5">{r.step}</td>
              <td className="px-4 py-1.5 text-ink-soft">{r.batch}</td>
              <td className="px-4 py-1.5 font-medium">{r.shotId}</td>
              <td className={`px-4 py-1.5 ${r.state === "failed" ? "text-bad" : ""}`} title={r.failedReason ?? undefined}>
                {STATE_WORDS[r.state] ?? r.state}
                {r.failedReason ? `: ${r.failedReason}` : ""}
              </td>
              <td className="px-4 py-1.5 text-right tabular-nums">{r.attemptsMade}</td>
              <td className="px-4 py-1.5 text-right tabular-nums">{r.stalls}</td>
              <td className="px-4 py-1.5 text-ink-soft">{r.worker ?? "–"}</td>
              <td className="px-4 py-1.5 text-right tabular-nums">{r.computeMs === null ? "–" : `${(r.computeMs / 1000).toFixed(2)} s`}</td>
            </tr>
          ))}
        </tbody>
      </table>
    </section>
  );
}
