"use client";

import { useActionState, useState } from "react";
import { addUser } from "@/app/lib/actions/users";
import type { FormState } from "@/app/lib/actions/form-state";

const ROLE_CHOICES = [
  { value: "processor", label: "Processor" },
  { value: "lead", label: "Lead" },
  { value: "auditor", label: "Auditor" },
  { value: "admin", label: "Administrator" },
];

function FieldError({ messages, name }: { messages: Record<string, string>; name: string }) {
  const msg = messages[name];
  return msg ? <p className="mt-1 text-xs text-bad" data-testid={`field-error-${name}`}>{msg}</p> : null;
}

/**
 * The add-someone form. Each message is shown once: beside its field when it names one, else
 * above the button; a field's message goes as soon as that field is edited (it described the
 * old value), and all of them on the next submit.
 */
export function AddUserForm() {
  const [state, action, pending] = useActionState(addUser, {});
  // Fields edited since the answer was given, per answer (a new answer starts afresh).
  const [edited, setEdited] = useState<{ state: FormState; names: Set<string> }>({ state, names: new Set() });
  const editedNames = edited.state === state ? edited.names : new Set<string>();
  const fieldMessages = Object.fromEntries(Object.entries(state.fields ?? {}).filter(([k]) => !editedNames.has(k)));
  const fieldMessageTexts = new Set(Object.values(state.fields ?? {}));
  const generalError = state.error && !fieldMessageTexts.has(state.error) && !(state.fields && Object.keys(state.fields).length && state.error === "Some fields need attention.") ? state.error : null;
  const onEdit = (e: React.FormEvent<HTMLFormElement>) => {
    const name = (e.target as HTMLInputElement).name;
    if (name && state.fields?.[name]) setEdited({ state, names: new Set([...editedNames, name]) });
  };
  return (
    <form action={action} onInput={onEdit} className="space-y-3" aria-label="Add someone">
      <div>
        <label className="label" htmlFor="new-name">Name</label>
        <input id="new-name" name="name" className="field mt-1" required />
        <FieldError messages={fieldMessages} name="name" />
      </div>
      <div>
        <label className="label" htmlFor="new-email">Email</label>
        <input id="new-email" name="email" type="email" className="field mt-1" required />
        <FieldError messages={fieldMessages} name="email" />
      </div>
      <div>
        <label className="label" htmlFor="new-role">Role</label>
        <select id="new-role" name="role" className="field mt-1" defaultValue="processor">
          {ROLE_CHOICES.map((r) => <option key={r.value} value={r.value}>{r.label}</option>)}
        </select>
        <FieldError messages={fieldMessages} name="role" />
      </div>
      <div>
        <label className="label" htmlFor="new-password">Password (optional)</label>
        <input id="new-password" name="password" type="password" autoComplete="new-password" className="field mt-1" placeholder="empty: invite with a temporary password" />
        <FieldError messages={fieldMessages} name="password" />
      </div>
      {generalError ? <p role="alert" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad" data-testid="form-error">{generalError}</p> : null}
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
