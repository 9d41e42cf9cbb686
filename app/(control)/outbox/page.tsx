import type { Metadata } from "next";
import { getDb } from "@/db/client";
import { listNotices } from "@/db/queries/notices";
import { pageUserWith } from "@/app/lib/page-user";
import { smtpSettings } from "@/app/lib/mail";
import { formatTime } from "@/app/ui/format";
import { NOTICE_LABELS } from "@/db/vocabulary";

export const metadata: Metadata = { title: "Outbox" };
export const dynamic = "force-dynamic";

/** The mail notices the control room sent or is about to send, newest first, readable in full. */
export default async function OutboxPage({ searchParams }: { searchParams: Promise<{ state?: string }> }) {
  await pageUserWith("audit.read");
  const wantedState = (await searchParams).state;
  const state = wantedState === "sent" || wantedState === "waiting" ? wantedState : undefined;
  const rows = listNotices(getDb(), { state, limit: 200 });
  const smtp = smtpSettings();
  return (
    <div className="space-y-6">
      <div>
        <h1>Outbox</h1>
        <p className="text-ink-soft">
          Mail notices about runs, reviews and uploads. {smtp ? `They go through ${smtp.host}:${smtp.port}.` : "No mail server is set up: notices wait here."} Password links are mailed directly and never listed.
        </p>
        <p className="mt-2 flex gap-3 text-sm">
          <a href="/outbox" className={state ? "text-accent hover:underline" : "font-medium"}>All</a>
          <a href="/outbox?state=sent" className={state === "sent" ? "font-medium" : "text-accent hover:underline"}>Sent</a>
          <a href="/outbox?state=waiting" className={state === "waiting" ? "font-medium" : "text-accent hover:underline"}>Waiting</a>
        </p>
      </div>
      {rows.length === 0 ? (
        <p className="card p-4 text-sm muted" data-testid="outbox-empty">No notices{state ? ` ${state}` : ""} yet.</p>
      ) : (
        <ul className="space-y-3" data-testid="outbox">
          {rows.map((n) => (
            <li key={n.id} className="card p-4" data-testid={`notice-${n.id}`} data-kind={n.kind}>
              <div className="flex flex-wrap items-baseline justify-between gap-2">
                <p className="font-medium">{n.subject}</p>
                <p className="text-xs muted">
                  {n.sentAt ? `sent ${formatTime(n.sentAt.getTime())}` : n.error ? `not sent yet (${n.attempts} attempt${n.attempts === 1 ? "" : "s"}): ${n.error}` : `waiting since ${formatTime(n.createdAt.getTime())}`}
                </p>
              </div>
              <p className="text-xs text-ink-soft">To {n.toAddress} · {NOTICE_LABELS[n.kind]}</p>
              <pre className="mt-2 whitespace-pre-wrap rounded bg-ground p-3 text-xs">{n.body}</pre>
            </li>
          ))}
        </ul>
      )}
    </div>
  );
}
