"use client";

import { signIn } from "next-auth/react";
import { useState } from "react";
import { signInErrorMessage } from "@/app/lib/sign-in-messages";

/** Email and password form; on success goes to `next`. */
export function SignInForm({ next, initialError }: { next: string; initialError?: string }) {
  const [error, setError] = useState(initialError);
  const [busy, setBusy] = useState(false);

  async function onSubmit(event: React.FormEvent<HTMLFormElement>) {
    event.preventDefault();
    setBusy(true);
    setError(undefined);
    const form = new FormData(event.currentTarget);
    const result = await signIn("credentials", {
      email: String(form.get("email") ?? ""),
      password: String(form.get("password") ?? ""),
      redirect: false,
    });
    if (!result || result.error) {
      setBusy(false);
      setError(signInErrorMessage(result?.error ?? ""));
      return;
    }
    window.location.assign(next);
  }

  return (
    <form onSubmit={onSubmit} className="space-y-4" aria-label="Sign in">
      <div>
        <label htmlFor="email" className="label">Email</label>
        <input id="email" name="email" type="email" autoComplete="username" required className="field mt-1" />
      </div>
      <div>
        <label htmlFor="password" className="label">Password</label>
        <input id="password" name="password" type="password" autoComplete="current-password" required className="field mt-1" />
      </div>
      {error ? (
        <p role="alert" data-testid="sign-in-error" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad">{error}</p>
      ) : null}
      <button type="submit" className="btn-primary w-full justify-center" disabled={busy}>
        {busy ? "Signing in…" : "Sign in"}
      </button>
    </form>
  );
}
