"use client";

import { useRef, useState, useTransition } from "react";
import { useQueryClient } from "@tanstack/react-query";
import { decideRun } from "@/app/lib/actions/reviews";
import type { RunView } from "@/app/lib/view-types";
import { formatTime } from "@/app/ui/format";

/** The lead's decision on a run (approve or send back with a comment), and earlier decisions. */
export function ReviewPanel({ run, canReview }: { run: RunView; canReview: boolean }) {
  const client = useQueryClient();
  const [comment, setComment] = useState("");
  const [error, setError] = useState<string | null>(null);
  const [pending, startTransition] = useTransition();
  // A second click before React re-renders must not send a second decision either.
  const sending = useRef(false);
  const finished = run.status === "succeeded" || run.status === "failed";

  function decide(decision: "approved" | "returned") {
    if (sending.current) return;
    sending.current = true;
    setError(null);
    startTransition(async () => {
      try {
        const state = await decideRun({ runId: run.id, decision, comment });
        if (state.error) setError(state.fields?.comment ?? state.error);
        else setComment("");
        await client.invalidateQueries({ queryKey: ["run", run.id] });
      } finally {
        sending.current = false;
      }
    });
  }
  const latestIsApproval = run.reviews[0]?.decision === "approved";

  const latest = run.reviews[0];
  return (
    <section className="card p-4 text-sm" aria-label="Review" data-testid="review-panel">
      <h2 className="mb-2">Review</h2>
      {latest ? (
        <p className={`mb-2 rounded-md px-3 py-2 text-xs ${latest.decision === "approved" ? "bg-ok-soft text-ok" : "bg-warn-soft text-warn"}`}>
          {latest.decision === "approved" ? "Approved" : "Sent back"} by {latest.reviewer}, {formatTime(latest.at)}
        </p>
      ) : (
        <p className="mb-2 text-xs muted">Not reviewed yet.</p>
      )}
      {canReview && finished ? (
        <div className="space-y-2">
          <label className="label" htmlFor="review-comment">Comment (needed when sending back)</label>
          <textarea id="review-comment" className="field h-16" value={comment} onChange={(e) => setComment(e.target.value)} />
          {error ? <p role="alert" className="text-xs text-bad">{error}</p> : null}
          <div className="flex gap-2">
            <button type="button" className="btn-primary" disabled={pending || latestIsApproval || run.status !== "succeeded"} onClick={() => decide("approved")} data-testid="approve-button">
              {pending ? "Saving…" : latestIsApproval ? "Approved" : "Approve"}
            </button>
            <button type="button" className="btn" disabled={pending} onClick={() => decide("returned")}>Send back</button>
          </div>
        </div>
      ) : null}
      {run.reviews.length ? (
        <ul className="mt-3 space-y-2 border-t border-line pt-2 text-xs">
          {run.reviews.map((r) => (
            <li key={r.id}>
              <span className="font-medium">{r.decision === "approved" ? "Approved" : "Sent back"}</span> · {r.reviewer} · <span className="muted">{formatTime(r.at)}</span>
              {r.comment ? <p className="text-ink-soft">“{r.comment}”</p> : null}
            </li>
          ))}
        </ul>
      ) : null}
    </section>
  );
}
