import type { Metadata } from "next";
import { safeNextPath } from "@/app/lib/safe-redirect";
import { signInErrorMessage } from "@/app/lib/sign-in-messages";
import { SignInForm } from "@/app/ui/auth/sign-in-form";

export const metadata: Metadata = { title: "Sign in" };
// Rendered per request so that its scripts carry the nonce of the content security policy.
export const dynamic = "force-dynamic";

export default async function SignInPage({ searchParams }: { searchParams: Promise<{ next?: string; error?: string }> }) {
  const { next, error } = await searchParams;
  const safeNext = safeNextPath(next);
  return (
    <main className="flex min-h-screen items-center justify-center px-4">
      <div className="w-full max-w-sm">
        <div className="mb-6 flex items-center gap-3">
          {/* eslint-disable-next-line @next/next/no-img-element */}
          <img src="/icon.svg" alt="" width={36} height={36} />
          <div>
            <p className="text-lg font-semibold leading-tight">Tracewright</p>
            <p className="text-xs muted">Control room · seismic processing records</p>
          </div>
        </div>
        <div className="card p-6">
          <h1 className="mb-4">Sign in</h1>
          <SignInForm next={safeNext} initialError={error ? signInErrorMessage(error) : undefined} />
        </div>
        <p className="mt-4 text-sm">
          <a href="/forgot-password" className="text-accent hover:underline" data-testid="forgot-password-link">Forgotten your password?</a>
        </p>
        <p className="mt-2 text-xs muted">
          Accounts are added by an administrator. The demo prints its accounts when it starts.
        </p>
      </div>
    </main>
  );
}
