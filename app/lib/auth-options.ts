/**
 * next-auth options: email and password (bcrypt) via the Credentials provider, JWT sessions
 * carrying the user id and role. Built on demand so that `next build` never opens the database
 * or creates the secret.
 */
import type { NextAuthOptions } from "next-auth";
import CredentialsProvider from "next-auth/providers/credentials";
import { z } from "zod";
import { getDb } from "@/db/client";
import { verifyCredentials } from "@/db/queries/users";
import { authSecret } from "./auth-secret";
import { safeAuthRedirect } from "./safe-redirect";

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
        async authorize(raw) {
          const parsed = credentialsSchema.safeParse(raw);
          if (!parsed.success) return null;
          const user = await verifyCredentials(getDb(), parsed.data.email, parsed.data.password);
          if (!user) return null;
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
        if (token.userId !== undefined && token.role) {
          session.user = { ...session.user, id: token.userId, role: token.role };
        }
        return session;
      },
    },
  };
}
