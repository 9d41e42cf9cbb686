import type { Metadata } from "next";
import { getDb } from "@/db/client";
import { listUsers } from "@/db/queries/users";
import { pageUserWith } from "@/app/lib/page-user";
import { ROLE_LABELS, ROLE_PERMISSIONS } from "@/app/lib/permissions";
import { smtpSettings } from "@/app/lib/mail";
import { ROLES } from "@/db/schema";
import { AddUserForm } from "@/app/ui/people/add-user-form";
import { UserRowControls } from "@/app/ui/people/user-row-controls";
import { PERMISSION_WORDS } from "@/app/ui/permission-words";

export const metadata: Metadata = { title: "People" };
export const dynamic = "force-dynamic";

export default async function PeoplePage() {
  const me = await pageUserWith("users.manage");
  const users = listUsers(getDb());
  const mailReady = smtpSettings() !== null;
  return (
    <div className="space-y-6">
      <div>
        <h1>People</h1>
        <p className="text-ink-soft">Who may sign in, and with which role. People are never deleted: a deactivated account keeps its name in runs, reviews and the audit trail.</p>
      </div>
      <div className="grid gap-6 lg:grid-cols-[1fr_340px]">
        <section className="card overflow-hidden" aria-label="Accounts">
          <table className="w-full text-sm">
            <thead className="bg-ground text-left text-xs text-ink-soft">
              <tr>
                <th className="px-4 py-2 font-medium">Name</th>
                <th className="px-4 py-2 font-medium">Email</th>
                <th className="px-4 py-2 font-medium">Role</th>
                <th className="px-4 py-2 font-medium">Status</th>
                <th className="px-4 py-2 font-medium"><span className="sr-only">Actions</span></th>
              </tr>
            </thead>
            <tbody>
              {users.map((u) => (
                <tr key={u.id} className="border-t border-line" data-testid={`user-${u.email}`}>
                  <td className="px-4 py-2 font-medium">{u.name}</td>
                  <td className="px-4 py-2 text-ink-soft">{u.email}</td>
                  <td className="px-4 py-2">{ROLE_LABELS[u.role]}</td>
                  <td className="px-4 py-2">
                    {u.active ? <span className="text-ok">Active</span> : <span className="text-ink-faint">Deactivated</span>}
                  </td>
                  <td className="px-4 py-2">
                    {u.id === me.id ? <span className="text-xs muted">you</span> : <UserRowControls user={{ id: u.id, role: u.role, active: u.active, name: u.name }} />}
                  </td>
                </tr>
              ))}
            </tbody>
          </table>
        </section>
        <aside className="space-y-6">
          <section className="card p-4" aria-label="Add someone">
            <h2 className="mb-1">Add someone</h2>
            <p className="mb-3 text-xs muted">
              {mailReady
                ? "Leave the password empty to send an invitation with a temporary password by email."
                : "Leave the password empty to invite with a temporary password. No mail server is set up here, so the temporary password is shown to you on this page to pass on."}
            </p>
            <AddUserForm />
          </section>
          <section className="card p-4 text-xs" aria-label="What each role may do">
            <h2 className="mb-2 text-sm">What each role may do</h2>
            <dl className="space-y-2">
              {ROLES.map((r) => (
                <div key={r}>
                  <dt className="font-medium">{ROLE_LABELS[r]}</dt>
                  <dd className="text-ink-soft" data-testid={`role-words-${r}`}>{ROLE_PERMISSIONS[r].map((p) => PERMISSION_WORDS[p]).join("; ")}</dd>
                </div>
              ))}
            </dl>
          </section>
        </aside>
      </div>
    </div>
  );
}
