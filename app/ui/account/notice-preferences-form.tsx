"use client";

import { useActionState } from "react";
import { saveNoticePreferences } from "@/app/lib/actions/account";
import { NOTICE_KINDS, NOTICE_LABELS, type NoticeKind } from "@/db/vocabulary";

/** One checkbox per kind of mail notice. */
export function NoticePreferencesForm({ wanted }: { wanted: NoticeKind[] }) {
  const [state, action, pending] = useActionState(saveNoticePreferences, {});
  return (
    <form action={action} className="space-y-2" aria-label="Mail notices" data-testid="notice-preferences">
      {NOTICE_KINDS.map((k) => (
        <label key={k} className="flex items-start gap-2 text-sm">
          <input type="checkbox" name={k} defaultChecked={wanted.includes(k)} className="mt-1" data-testid={`notice-${k}`} />
          <span>{NOTICE_LABELS[k]}</span>
        </label>
      ))}
      <div className="flex items-center gap-3 pt-2">
        <button type="submit" className="btn" disabled={pending}>{pending ? "Saving…" : "Save notices"}</button>
        {state.ok ? <p role="status" className="text-sm text-ok">{state.ok}</p> : null}
        {state.error ? <p role="alert" className="text-sm text-bad">{state.error}</p> : null}
      </div>
    </form>
  );
}
