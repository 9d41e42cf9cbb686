"use client";

import { useState, useTransition } from "react";
import Link from "next/link";
import { useRouter } from "next/navigation";
import { makeRunReport } from "@/app/lib/actions/reports";
import type { FormState } from "@/app/lib/actions/form-state";

/**
 * The lead's choices for the report (positions of the depth profiles, shots shown observed
 * against synthetic): "Show here" previews them on this page, "Make the PDF" stores a report.
 */
export function MakeReportForm({ runId, positions, shots }: { runId: number; positions: string; shots: string }) {
  const router = useRouter();
  const [values, setValues] = useState({ positions, shots });
  const [state, setState] = useState<FormState & { hash?: string }>({});
  const [pending, startTransition] = useTransition();
  const query = new URLSearchParams(Object.entries(values).filter(([, v]) => v.trim() !== "")).toString();
  return (
    <form
      className="space-y-3"
      aria-label="Make the report"
      onSubmit={(e) => {
        e.preventDefault();
        startTransition(async () => {
          const answer = await makeRunReport({ runId, ...values });
          setState(answer);
          if (answer.ok) router.refresh();
        });
      }}
    >
      <div>
        <label className="label" htmlFor="report-positions">Depth profiles at (m along the profile, separated by commas)</label>
        <input id="report-positions" className="field mt-1" value={values.positions} onChange={(e) => setValues({ ...values, positions: e.target.value })} placeholder="default: a quarter, half and three quarters along the spread" />
        {state.fields?.positions ? <p className="mt-1 text-xs text-bad">{state.fields.positions}</p> : null}
      </div>
      <div>
        <label className="label" htmlFor="report-shots">Shots shown observed against synthetic (gather ids, separated by commas)</label>
        <input id="report-shots" className="field mt-1" value={values.shots} onChange={(e) => setValues({ ...values, shots: e.target.value })} placeholder="default: the first and the middle shot" />
        {state.fields?.shots ? <p className="mt-1 text-xs text-bad">{state.fields.shots}</p> : null}
      </div>
      {state.error && !state.fields ? <p role="alert" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad">{state.error}</p> : null}
      {state.ok ? (
        <p role="status" className="rounded-md bg-ok-soft px-3 py-2 text-sm text-ok">
          {state.ok} {state.hash ? <a className="underline" href={`/api/runs/${runId}/reports/${state.hash}`}>Download the PDF</a> : null}
        </p>
      ) : null}
      <div className="flex gap-2">
        <Link className="btn" href={`/runs/${runId}/report${query ? `?${query}` : ""}`}>Show here</Link>
        <button type="submit" className="btn-primary" disabled={pending} data-testid="make-report-button">{pending ? "Making the PDF…" : "Make the PDF"}</button>
      </div>
    </form>
  );
}
