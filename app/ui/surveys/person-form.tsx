"use client";

import { useActionState } from "react";
import { putPersonOnSurvey } from "@/app/lib/actions/surveys";
import { SURVEY_ROLES } from "@/db/vocabulary";

/** Puts a user on a survey by e-mail, with what they do on it. */
export function PersonForm({ survey }: { survey: string }) {
  const [state, action, pending] = useActionState(putPersonOnSurvey, {});
  return (
    <form action={action} className="flex flex-wrap items-end gap-2" aria-label="Put someone on the survey">
      <input type="hidden" name="survey" value={survey} />
      <div className="min-w-56 flex-1">
        <label className="label" htmlFor="person-email">E-mail of a user</label>
        <input id="person-email" name="email" type="email" className="field mt-1" required />
      </div>
      <div>
        <label className="label" htmlFor="person-role">On this survey as</label>
        <select id="person-role" name="role" className="field mt-1" defaultValue="processor">
          {SURVEY_ROLES.map((r) => <option key={r} value={r}>{r}</option>)}
        </select>
      </div>
      <button type="submit" className="btn" disabled={pending}>{pending ? "Saving…" : "Put on survey"}</button>
      {state.ok ? <p role="status" className="w-full text-sm text-ok">{state.ok}</p> : null}
      {state.error ? <p role="alert" className="w-full text-sm text-bad">{state.fields ? Object.values(state.fields).join(" ") : state.error}</p> : null}
    </form>
  );
}
