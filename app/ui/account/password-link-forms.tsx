"use client";

import { useActionState } from "react";
import { requestPasswordReset, setPasswordWithLink } from "@/app/lib/actions/account";
import type { FormState } from "@/app/lib/actions/form-state";

function FieldError({ state, name }: { state: FormState; name: string }) {
  const msg = state.fields?.[name];
  return msg ? <p className="mt-1 text-xs text-bad" data-testid={`field-error-${name}`}>{msg}</p> : null;
}

/** Asks for a reset link by e-mail. */
export function ForgotPasswordForm() {
  const [state, action, pending] = useActionState(requestPasswordReset, {});
  if (state.ok) return <p role="status" className="text-sm" data-testid="reset-requested">{state.ok}</p>;
  return (
    <form action={action} className="space-y-4" aria-label="Ask for a reset link">
      <div>
        <label htmlFor="reset-email" className="label">Email you sign in with</label>
        <input id="reset-email" name="email" type="email" autoComplete="username" required className="field mt-1" />
        <FieldError state={state} name="email" />
      </div>
      {state.error && !state.fields ? <p role="alert" className="text-sm text-bad">{state.error}</p> : null}
      <button type="submit" className="btn-primary w-full justify-center" disabled={pending}>{pending ? "Sending…" : "Mail me a link"}</button>
    </form>
  );
}

/** Chooses a password through a mailed link. */
export function SetPasswordForm({ token }: { token: string }) {
  const [state, action, pending] = useActionState(setPasswordWithLink, {});
  if (state.ok) {
    return (
      <div className="space-y-3">
        <p role="status" className="text-sm" data-testid="password-set">{state.ok}</p>
        <a href="/sign-in" className="btn-primary w-full justify-center">Sign in</a>
      </div>
    );
  }
  return (
    <form action={action} className="space-y-4" aria-label="Choose your password">
      <input type="hidden" name="token" value={token} />
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
      {state.error && (!state.fields || state.fields.token) ? <p role="alert" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad" data-testid="set-password-error">{state.fields?.token ?? state.error}</p> : null}
      <button type="submit" className="btn-primary w-full justify-center" disabled={pending}>{pending ? "Saving…" : "Set password"}</button>
    </form>
  );
}
