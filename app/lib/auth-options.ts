/**
 * next-auth options: email and password (bcrypt) via the Credentials provider, JWT sessions
 * carrying the user id and role. Built on demand so that `next build` never opens the database
 * or creates the secret.
 */
import "server-only";
import type { NextAuthOptions } from "next-auth";
import CredentialsProvider from "next-auth/providers/credentials";
import { z } from "zod";
import { getDb } from "@/db/client";
import { getUserById } from "@/db/queries/users";
import { authSecret } from "./auth-secret";
import { safeAuthRedirect } from "./safe-redirect";
import { clientAddress, signInWithThrottle } from "./sign-in-guard";
import { THROTTLED_PREFIX } from "./sign-in-messages";

const credentialsSchema = z.object({
  email: z.string().trim().email(),
  password: z.string().min(1).max(200),
});

/** Session lifetime: one working day, s. */
export const SESSION_MAX_AGE_S = 10 * 60 * 60;

/** The next-auth options (secret read or generated on first call). */
export function getAuthOptions(): NextAuthOptions {
  return {
    secret: authSecret(),
    session: { strategy: "jwt", maxAge: SESSION_MAX_AGE_S },
    pages: { signIn: "/sign-in", error: "/sign-in" },
    providers: [
      CredentialsProvider({
        name: "Email and password",
        credentials: {
          email: { label: "Email", type: "email" },
          password: { label: "Password", type: "password" },
        },
        async authorize(raw, req) {
          const parsed = credentialsSchema.safeParse(raw);
          if (!parsed.success) return null;
          const outcome = await signInWithThrottle(getDb(), parsed.data.email, parsed.data.password, clientAddress(req?.headers));
          // next-auth hands a thrown message to the sign-in form as `error`.
          if (outcome.kind === "throttled") throw new Error(`${THROTTLED_PREFIX}${outcome.retryAfterS}`);
          if (outcome.kind === "refused") return null;
          const { user } = outcome;
          return { id: String(user.id), email: user.email, name: user.name, role: user.role };
        },
      }),
    ],
    callbacks: {
      redirect({ url, baseUrl }) {
        return safeAuthRedirect(url, baseUrl);
      },
      jwt({ token, user }) {
        if (user) {
          token.userId = Number(user.id);
          token.role = user.role;
        }
        return token;
      },
      session({ session, token }) {
        // The role and the account's state come from the database at each read, so that
        // /api/auth/session shows no user for a deactivated account and the current role.
        const user = typeof token.userId === "number" ? getUserById(getDb(), token.userId) : null;
        if (!user || !user.active) return { expires: session.expires } as typeof session;
        session.user = { ...session.user, name: user.name, email: user.email, id: user.id, role: user.role };
        return session;
      },
    },
  };
}
