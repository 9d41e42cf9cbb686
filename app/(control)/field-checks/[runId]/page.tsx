import type { Metadata } from "next";
import Link from "next/link";
import { notFound } from "next/navigation";
import { pageUserWith } from "@/app/lib/page-user";
import { readFieldCheck } from "@/app/lib/field-check-reads";
import { formatTime } from "@/app/ui/format";
import { VerdictGrid, VerdictLegend } from "@/app/ui/field-checks/verdict-grid";

export const metadata: Metadata = { title: "Field check" };
export const dynamic = "force-dynamic";

const VERDICT_CLASS: Record<string, string> = { ok: "bg-ok-soft text-ok", warn: "bg-warn-soft text-warn", reshoot: "bg-bad-soft text-bad" };
const VERDICT_WORDS: Record<string, string> = { ok: "All good", warn: "Warnings", reshoot: "Reshoot needed" };
/** A figure at `digits` decimals ("–" when not judged; no "-0.0"). */
const fmt = (v: number, digits = 1) => (Number.isFinite(v) ? (Number(v.toFixed(digits)) || 0).toFixed(digits) : "–");

export default async function FieldCheckPage({ params }: { params: Promise<{ runId: string }> }) {
  await pageUserWith("runs.read");
  const id = Number((await params).runId);
  if (!Number.isInteger(id) || id <= 0) notFound();
  const found = readFieldCheck(id);
  if (!found) notFound();
  const { check, report, history } = found;
  const urgent = report.findings.filter((f) => f.verdict === "reshoot");
  const warnings = report.findings.filter((f) => f.verdict === "warn");
  return (
    <div className="space-y-6">
      <div>
        <p className="text-sm">
          <Link className="text-accent hover:underline" href="/field-checks">Field checks</Link> ·{" "}
          <Link className="text-accent hover:underline" href={`/runs/${check.runId}`}>Run {check.runId}</Link>
        </p>
        <h1 className="break-all">{check.folderPath}</h1>
        <p className="text-ink-soft">Checked {formatTime(check.finishedAt)}.</p>
      </div>
      <section aria-labelledby="summary" className="space-y-2">
        <h2 id="summary">Summary</h2>
        <p data-testid="field-check-verdict">
          <span className={`rounded px-2 py-1 text-sm font-medium ${VERDICT_CLASS[report.verdict]}`}>{VERDICT_WORDS[report.verdict]}</span>{" "}
          {report.counts.shots} records of {report.channels.length} channels: {report.counts.shotsReshoot} to reshoot or put right, {report.counts.shotsWarn} with warnings;{" "}
          {report.counts.reshoot} traces marked R, {report.counts.warn} marked W. {check.msPerRecord !== null ? `The check took ${check.msPerRecord} ms per record.` : ""}
        </p>
      </section>
      <section aria-labelledby="findings" className="space-y-2">
        <h2 id="findings">Before the crew leaves</h2>
        {urgent.length === 0 ? (
          <p>Nothing needs a reshoot.</p>
        ) : (
          <ol className="list-decimal space-y-1 pl-5" data-testid="field-check-urgent">
            {urgent.map((f, i) => (
              <li key={i}>
                <span className="rounded bg-bad-soft px-1 text-xs text-bad">R</span> {f.message}
              </li>
            ))}
          </ol>
        )}
        {warnings.length > 0 ? (
          <>
            <h3>Worth a look</h3>
            <ul className="list-disc space-y-1 pl-5">
              {warnings.map((f, i) => (
                <li key={i}>
                  <span className="rounded bg-warn-soft px-1 text-xs text-warn">W</span> {f.message}
                </li>
              ))}
            </ul>
          </>
        ) : null}
      </section>
      <section aria-labelledby="grid" className="space-y-2">
        <h2 id="grid">Every record and channel</h2>
        <VerdictLegend />
        <div className="overflow-x-auto rounded-md border border-line bg-panel p-2">
          <VerdictGrid report={report} />
        </div>
      </section>
      <section aria-labelledby="records" className="space-y-2">
        <h2 id="records">Records</h2>
        <table className="w-full text-sm">
          <thead>
            <tr className="text-left text-ink-soft">
              <th className="py-1 pr-3">Record</th>
              <th className="py-1 pr-3">Verdict</th>
              <th className="py-1 pr-3">Source x logged (m)</th>
              <th className="py-1 pr-3">Source x from data (m)</th>
              <th className="py-1 pr-3">Trigger shift (ms)</th>
              <th className="py-1 pr-3">Noise (× median)</th>
              <th className="py-1 pr-3">Hum (dB)</th>
              <th className="py-1 pr-3">Reasons</th>
            </tr>
          </thead>
          <tbody>
            {report.shots.map((s) => (
              <tr key={s.gatherId} className="border-t border-line">
                <td className="py-1 pr-3 font-mono">{s.gatherId}</td>
                <td className="py-1 pr-3">
                  <span className={`rounded px-1.5 text-xs ${VERDICT_CLASS[s.verdict]}`}>{s.verdict}</span>
                </td>
                <td className="py-1 pr-3">{fmt(s.loggedSourceXM)}</td>
                <td className="py-1 pr-3">{fmt(s.fittedSourceXM)}</td>
                <td className="py-1 pr-3">{fmt(s.triggerSlipMs)}</td>
                <td className="py-1 pr-3">{fmt(s.noiseRatio)}</td>
                <td className="py-1 pr-3">{fmt(s.humDb)}</td>
                <td className="py-1 pr-3">{s.reasons.join("; ")}</td>
              </tr>
            ))}
          </tbody>
        </table>
      </section>
      {history.length > 1 ? (
        <section aria-labelledby="history" className="space-y-2">
          <h2 id="history">Earlier checks of this folder</h2>
          <ul className="list-disc pl-5 text-sm">
            {history.map((h) => (
              <li key={h.runId}>
                <Link className="text-accent hover:underline" href={`/field-checks/${h.runId}`}>Run {h.runId}</Link>: {VERDICT_WORDS[h.verdict] ?? h.verdict}, {h.findings} findings ({formatTime(h.finishedAt)})
              </li>
            ))}
          </ul>
        </section>
      ) : null}
    </div>
  );
}
