import type { Metadata } from "next";
import { ForgotPasswordForm } from "@/app/ui/account/password-link-forms";

export const metadata: Metadata = { title: "Forgotten password" };
// Rendered per request so that its scripts carry the nonce of the content security policy.
export const dynamic = "force-dynamic";

/** Asks for a mailed link that sets a new password (no session needed). */
export default function ForgotPasswordPage() {
  return (
    <main className="flex min-h-screen items-center justify-center px-4">
      <div className="w-full max-w-sm">
        <div className="card p-6">
          <h1 className="mb-2">Forgotten password</h1>
          <p className="mb-4 text-sm muted">We mail a link to the address you sign in with. It works once, within an hour.</p>
          <ForgotPasswordForm />
        </div>
        <p className="mt-4 text-sm"><a href="/sign-in" className="text-accent hover:underline">Back to sign-in</a></p>
      </div>
    </main>
  );
}
