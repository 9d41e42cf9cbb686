import type { Metadata } from "next";
import { pageUserWith } from "@/app/lib/page-user";
import { readQueueWorkers } from "@/app/lib/queue-reads";

export const metadata: Metadata = { title: "Workers" };
export const dynamic = "force-dynamic";

function ago(ms: number): string {
  const s = Math.max(0, Math.round(ms / 1000));
  return s < 120 ? `${s} s ago` : `${Math.round(s / 60)} min ago`;
}

export default async function WorkersPage() {
  await pageUserWith("runs.read");
  const read = await readQueueWorkers();
  return (
    <div className="space-y-6">
      <div>
        <h1>Workers</h1>
        <p className="text-ink-soft">
          The machines that take shot work (forward solves, per-shot gradients) from the job queue. Start one on any machine that reaches Redis and the shared data folder with{" "}
          <code>tracewright worker</code>.
        </p>
      </div>
      {read.state === "local" && (
        <section className="card p-4" data-testid="queue-local">
          <p>No job queue is set up: every run works its shots in its own process, on the local worker pool. Set TRACEWRIGHT_REDIS_URL (for runs and for this server) to spread shots over machines.</p>
        </section>
      )}
      {read.state === "unreachable" && (
        <section className="card border-bad p-4 text-bad" data-testid="queue-unreachable">
          <p>The job queue at {read.url || "TRACEWRIGHT_REDIS_URL"} does not answer: {read.message}</p>
        </section>
      )}
      {read.state === "ok" && (
        <section className="card overflow-hidden" aria-label="Workers">
          <p className="px-4 pt-3 text-xs muted">Queue at {read.url}. A worker not heard from for 10 s is marked silent (stopped, killed or cut off); its running task goes to another worker once its lock runs out.</p>
          <table className="mt-2 w-full text-sm" data-testid="workers">
            <thead className="bg-ground text-left text-xs text-ink-soft">
              <tr>
                <th className="px-4 py-2 font-medium">Host</th>
                <th className="px-4 py-2 text-right font-medium">Process</th>
                <th className="px-4 py-2 text-right font-medium">At once</th>
                <th className="px-4 py-2 text-right font-medium">Tasks done</th>
                <th className="px-4 py-2 text-right font-medium">Failed</th>
                <th className="px-4 py-2 font-medium">Current task</th>
                <th className="px-4 py-2 font-medium">Last heard</th>
              </tr>
            </thead>
            <tbody>
              {read.value.length === 0 && (
                <tr>
                  <td colSpan={7} className="px-4 py-3 muted">
                    No workers registered: shot tasks wait on the queue until one starts.
                  </td>
                </tr>
              )}
              {read.value.map((w) => (
                <tr key={w.id} className="border-t border-line">
                  <td className="px-4 py-2 font-medium">{w.host}</td>
                  <td className="px-4 py-2 text-right tabular-nums">{w.pid}</td>
                  <td className="px-4 py-2 text-right tabular-nums">{w.concurrency}</td>
                  <td className="px-4 py-2 text-right tabular-nums">{w.tasksDone}</td>
                  <td className="px-4 py-2 text-right tabular-nums">{w.tasksFailed}</td>
                  <td className="px-4 py-2 text-ink-soft">{w.currentTasks.join(", ") || "–"}</td>
                  <td className={`px-4 py-2 ${w.silent ? "text-bad" : ""}`}>
                    {ago(w.heardMsAgo)}
                    {w.silent ? " (silent)" : ""}
                  </td>
                </tr>
              ))}
            </tbody>
          </table>
        </section>
      )}
    </div>
  );
}
