"use client";

import { useActionState, useEffect } from "react";
import { changeOwnPassword } from "@/app/lib/actions/password";
import type { FormState } from "@/app/lib/actions/form-state";

function FieldError({ state, name }: { state: FormState; name: string }) {
  const msg = state.fields?.[name];
  return msg ? <p className="mt-1 text-xs text-bad">{msg}</p> : null;
}

/** Current password, new password twice; on success goes to the runs list (or stays, with `stay`, on the account page). */
export function ChangePasswordForm({ stay = false }: { stay?: boolean }) {
  const [state, action, pending] = useActionState(changeOwnPassword, {});
  useEffect(() => {
    // A full load, so that the layout re-reads the account and no longer sends the person back here.
    if (state.ok && !stay) window.location.assign("/runs");
  }, [state.ok, stay]);
  return (
    <form action={action} className="space-y-4" aria-label="Choose your password">
      <div>
        <label htmlFor="current" className="label">{stay ? "Current password" : "Current (temporary) password"}</label>
        <input id="current" name="current" type="password" autoComplete="current-password" required className="field mt-1" />
        <FieldError state={state} name="current" />
      </div>
      <div>
        <label htmlFor="next" className="label">New password (10 characters or more)</label>
        <input id="next" name="next" type="password" autoComplete="new-password" minLength={10} required className="field mt-1" />
        <FieldError state={state} name="next" />
      </div>
      <div>
        <label htmlFor="repeat" className="label">New password again</label>
        <input id="repeat" name="repeat" type="password" autoComplete="new-password" required className="field mt-1" />
        <FieldError state={state} name="repeat" />
      </div>
      {state.error && !state.fields ? <p role="alert" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad">{state.error}</p> : null}
      {state.ok ? <p role="status" className="text-sm">{state.ok}</p> : null}
      <button type="submit" className="btn-primary w-full justify-center" disabled={pending}>
        {pending ? "Saving…" : stay ? "Change password" : "Save and go on"}
      </button>
    </form>
  );
}
