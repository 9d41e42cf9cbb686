import type { Metadata } from "next";
import { redirect } from "next/navigation";
import { getSessionUser } from "@/app/lib/session";
import { ChangePasswordForm } from "./change-password-form";

export const metadata: Metadata = { title: "Choose your password" };
export const dynamic = "force-dynamic";

/**
 * Change of one's own password. Outside the control room's layout on purpose: a person holding an
 * administrator-issued temporary password is sent here from every page until they choose their own.
 */
export default async function ChangePasswordPage() {
  const user = await getSessionUser();
  if (!user) redirect("/sign-in?next=%2Fchange-password");
  return (
    <main className="flex min-h-screen items-center justify-center px-4">
      <div className="w-full max-w-sm">
        <div className="card p-6">
          <h1 className="mb-2">Choose your password</h1>
          <p className="mb-4 text-sm muted" data-testid="change-password-reason">
            {user.mustChangePassword
              ? `${user.name}, you signed in with a temporary password from an administrator. Choose your own to go on.`
              : `${user.name}, change the password you sign in with.`}
          </p>
          <ChangePasswordForm />
        </div>
      </div>
    </main>
  );
}
