import type { Metadata } from "next";
import { getDb } from "@/db/client";
import { checkPasswordToken, TOKEN_PROBLEM_MESSAGES } from "@/db/queries/password-tokens";
import { SetPasswordForm } from "@/app/ui/account/password-link-forms";

export const metadata: Metadata = { title: "Choose your password" };
export const dynamic = "force-dynamic";

/**
 * The page a mailed link opens (a reset or an invitation): says whose password it sets, or why the
 * link no longer works. The check is repeated when the form is sent (setPasswordWithLink).
 */
export default async function SetPasswordPage({ searchParams }: { searchParams: Promise<{ token?: string }> }) {
  const token = (await searchParams).token ?? "";
  const check = checkPasswordToken(getDb(), token);
  return (
    <main className="flex min-h-screen items-center justify-center px-4">
      <div className="w-full max-w-sm">
        <div className="card p-6">
          <h1 className="mb-2">Choose your password</h1>
          {check.ok ? (
            <>
              <p className="mb-4 text-sm muted" data-testid="set-password-for">
                {check.purpose === "invitation" ? `Welcome, ${check.name}. ` : ""}Choose the password for {check.email}.
              </p>
              <SetPasswordForm token={token} />
            </>
          ) : (
            <>
              <p role="alert" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad" data-testid="set-password-error">{TOKEN_PROBLEM_MESSAGES[check.problem]}</p>
              <p className="mt-4 text-sm"><a href="/forgot-password" className="text-accent hover:underline">Ask for a new link</a></p>
            </>
          )}
        </div>
      </div>
    </main>
  );
}
