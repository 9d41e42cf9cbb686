"use client";

import { useActionState } from "react";
import { changeActive, changeRole } from "@/app/lib/actions/users";

/** Role picker and activate/deactivate button for one account. */
export function UserRowControls({ user }: { user: { id: number; role: string; active: boolean; name: string } }) {
  const [roleState, roleAction, rolePending] = useActionState(changeRole, {});
  const [activeState, activeAction, activePending] = useActionState(changeActive, {});
  const message = roleState.error ?? activeState.error;
  return (
    <div className="flex flex-wrap items-center justify-end gap-2">
      <form action={roleAction} className="flex items-center gap-1">
        <input type="hidden" name="userId" value={user.id} />
        <label className="sr-only" htmlFor={`role-${user.id}`}>Role of {user.name}</label>
        <select id={`role-${user.id}`} name="role" defaultValue={user.role} className="field w-auto py-1 text-xs">
          <option value="processor">Processor</option>
          <option value="lead">Lead</option>
          <option value="auditor">Auditor</option>
          <option value="admin">Administrator</option>
        </select>
        <button className="btn py-1 text-xs" disabled={rolePending}>Set role</button>
      </form>
      <form action={activeAction}>
        <input type="hidden" name="userId" value={user.id} />
        <input type="hidden" name="active" value={user.active ? "false" : "true"} />
        <button className="btn py-1 text-xs" disabled={activePending}>{user.active ? "Deactivate" : "Reactivate"}</button>
      </form>
      {message ? <p role="alert" className="w-full text-right text-xs text-bad">{message}</p> : null}
    </div>
  );
}
