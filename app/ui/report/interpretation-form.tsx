"use client";

import { useState, useTransition } from "react";
import { useForm } from "react-hook-form";
import { saveRunInterpretation } from "@/app/lib/actions/reports";
import type { FormState } from "@/app/lib/actions/form-state";

/** The lead's interpretation, one text per report section; each save keeps the earlier versions. */
export function InterpretationForm({ runId, sections }: { runId: number; sections: Array<{ section: string; heading: string; text: string; version: number | null }> }) {
  const defaults = Object.fromEntries(sections.map((s) => [s.section, s.text]));
  const form = useForm<Record<string, string>>({ defaultValues: defaults });
  const [state, setState] = useState<FormState>({});
  const [pending, startTransition] = useTransition();
  const onSubmit = form.handleSubmit((values) => {
    startTransition(async () => {
      setState(await saveRunInterpretation({ runId, sections: values }));
    });
  });
  return (
    <form onSubmit={onSubmit} className="space-y-3" aria-label="Interpretation" data-testid="interpretation-form">
      {sections.map((s) => (
        <div key={s.section}>
          <label className="label" htmlFor={`interpretation-${s.section}`}>
            {s.heading} {s.version ? <span className="muted">(version {s.version})</span> : null}
          </label>
          <textarea id={`interpretation-${s.section}`} className="field mt-1 h-24" {...form.register(s.section)} />
          {state.fields?.[`sections.${s.section}`] || state.fields?.[s.section] ? (
            <p className="mt-1 text-xs text-bad">{state.fields[`sections.${s.section}`] ?? state.fields[s.section]}</p>
          ) : null}
        </div>
      ))}
      {state.error ? <p role="alert" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad">{state.error}</p> : null}
      {state.ok ? <p role="status" className="rounded-md bg-ok-soft px-3 py-2 text-sm text-ok">{state.ok}</p> : null}
      <button type="submit" className="btn-primary" disabled={pending}>{pending ? "Saving…" : "Save the interpretation"}</button>
    </form>
  );
}
