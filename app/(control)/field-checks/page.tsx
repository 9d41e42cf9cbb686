import type { Metadata } from "next";
import Link from "next/link";
import { pageUserWith } from "@/app/lib/page-user";
import { readFieldCheckList } from "@/app/lib/field-check-reads";
import { formatTime } from "@/app/ui/format";

export const metadata: Metadata = { title: "Field checks" };
export const dynamic = "force-dynamic";

const VERDICT_CLASS: Record<string, string> = { ok: "bg-ok-soft text-ok", warn: "bg-warn-soft text-warn", reshoot: "bg-bad-soft text-bad" };
const VERDICT_WORDS: Record<string, string> = { ok: "All good", warn: "Warnings", reshoot: "Reshoot needed" };

export default async function FieldChecksPage() {
  await pageUserWith("runs.read");
  const checks = readFieldCheckList();
  return (
    <div className="space-y-4">
      <div>
        <h1>Field checks</h1>
        <p className="text-ink-soft">
          The latest check of each field folder: dead and noisy channels, noisy blows, polarity, trigger and source position slips, mains hum, clipping.
        </p>
      </div>
      {checks.length === 0 ? (
        <p className="muted">No field checks yet. Run a pipeline with a field-check step, or let the folder watcher run one.</p>
      ) : (
        <table className="w-full text-sm" data-testid="field-check-list">
          <thead>
            <tr className="text-left text-ink-soft">
              <th className="py-1 pr-3">Folder</th>
              <th className="py-1 pr-3">Verdict</th>
              <th className="py-1 pr-3">Records</th>
              <th className="py-1 pr-3">To reshoot</th>
              <th className="py-1 pr-3">Findings</th>
              <th className="py-1 pr-3">Time per record</th>
              <th className="py-1 pr-3">Checked</th>
            </tr>
          </thead>
          <tbody>
            {checks.map((c) => (
              <tr key={c.runId} className="border-t border-line">
                <td className="py-1.5 pr-3">
                  <Link className="text-accent hover:underline" href={`/field-checks/${c.runId}`}>
                    {c.folderPath}
                  </Link>
                </td>
                <td className="py-1.5 pr-3">
                  <span className={`rounded px-1.5 py-0.5 text-xs ${VERDICT_CLASS[c.verdict] ?? ""}`}>{VERDICT_WORDS[c.verdict] ?? c.verdict}</span>
                </td>
                <td className="py-1.5 pr-3">{c.records}</td>
                <td className="py-1.5 pr-3">{c.recordsToReshoot}</td>
                <td className="py-1.5 pr-3">{c.findings}</td>
                <td className="py-1.5 pr-3">{c.msPerRecord !== null ? `${c.msPerRecord} ms` : "–"}</td>
                <td className="py-1.5 pr-3">{formatTime(c.finishedAt)}</td>
              </tr>
            ))}
          </tbody>
        </table>
      )}
    </div>
  );
}
