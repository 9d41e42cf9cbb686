import type { Metadata } from "next";
import { getDb } from "@/db/client";
import { wantedNoticeKinds } from "@/db/queries/notices";
import { pageUser } from "@/app/lib/page-user";
import { ROLE_LABELS } from "@/app/lib/permissions";
import { smtpSettings } from "@/app/lib/mail";
import { ChangePasswordForm } from "@/app/change-password/change-password-form";
import { NoticePreferencesForm } from "@/app/ui/account/notice-preferences-form";

export const metadata: Metadata = { title: "Your account" };
export const dynamic = "force-dynamic";

/** One's own account: the password and which mail notices to get. */
export default async function AccountPage() {
  const user = await pageUser();
  const wanted = wantedNoticeKinds(getDb(), user.id);
  return (
    <div className="space-y-6">
      <div>
        <h1>Your account</h1>
        <p className="text-ink-soft">{user.name} · {user.email} · {ROLE_LABELS[user.role]}</p>
      </div>
      <div className="grid gap-6 lg:grid-cols-2">
        <section className="card p-4" aria-label="Mail notices">
          <h2 className="mb-1">Mail notices</h2>
          <p className="mb-3 text-xs muted">
            {smtpSettings() ? `Sent to ${user.email}.` : "No mail server is set up here: notices wait in the outbox until one is."}
          </p>
          <NoticePreferencesForm wanted={wanted} />
        </section>
        <section className="card max-w-md p-4" aria-label="Password">
          <h2 className="mb-3">Change your password</h2>
          <ChangePasswordForm stay />
        </section>
      </div>
    </div>
  );
}
