"use client";

import { useActionState } from "react";
import { addUser } from "@/app/lib/actions/users";
import type { FormState } from "@/app/lib/actions/form-state";

const ROLE_CHOICES = [
  { value: "processor", label: "Processor" },
  { value: "lead", label: "Lead" },
  { value: "auditor", label: "Auditor" },
  { value: "admin", label: "Administrator" },
];

function FieldError({ state, name }: { state: FormState; name: string }) {
  const msg = state.fields?.[name];
  return msg ? <p className="mt-1 text-xs text-bad">{msg}</p> : null;
}

export function AddUserForm() {
  const [state, action, pending] = useActionState(addUser, {});
  return (
    <form action={action} className="space-y-3" aria-label="Add someone">
      <div>
        <label className="label" htmlFor="new-name">Name</label>
        <input id="new-name" name="name" className="field mt-1" required />
        <FieldError state={state} name="name" />
      </div>
      <div>
        <label className="label" htmlFor="new-email">Email</label>
        <input id="new-email" name="email" type="email" className="field mt-1" required />
        <FieldError state={state} name="email" />
      </div>
      <div>
        <label className="label" htmlFor="new-role">Role</label>
        <select id="new-role" name="role" className="field mt-1" defaultValue="processor">
          {ROLE_CHOICES.map((r) => <option key={r.value} value={r.value}>{r.label}</option>)}
        </select>
        <FieldError state={state} name="role" />
      </div>
      <div>
        <label className="label" htmlFor="new-password">Password (optional)</label>
        <input id="new-password" name="password" type="password" autoComplete="new-password" className="field mt-1" placeholder="empty: invite with a temporary password" />
        <FieldError state={state} name="password" />
      </div>
      {state.error ? <p role="alert" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad">{state.error}</p> : null}
      {state.ok ? <p role="status" className="rounded-md bg-ok-soft px-3 py-2 text-sm text-ok">{state.ok}</p> : null}
      {state.temporaryPassword ? (
        <p className="rounded-md border border-warn bg-warn-soft px-3 py-2 text-sm">
          Temporary password: <code data-testid="temporary-password" className="font-mono font-medium">{state.temporaryPassword}</code>
        </p>
      ) : null}
      <button type="submit" className="btn-primary" disabled={pending}>{pending ? "Adding…" : "Add or invite"}</button>
    </form>
  );
}
