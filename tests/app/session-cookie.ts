/**
 * Route handlers read the session from the next-auth cookie through next/headers. Tests mock
 * next/headers with a cookie jar they fill with a real next-auth JWT (encode from next-auth/jwt).
 */
import { encode } from "next-auth/jwt";
import type { Role } from "../../db/schema";

const jar = new Map<string, string>();

/** The mocked `cookies()` store. */
export const cookieStore = {
  get: (name: string) => (jar.has(name) ? { name, value: jar.get(name)! } : undefined),
  getAll: () => [...jar].map(([name, value]) => ({ name, value })),
  has: (name: string) => jar.has(name),
};

/** Signs in as `user` for the following handler calls (a session token signed with the test secret). */
export async function signInAs(user: { id: number; role: Role; name: string; email: string }): Promise<void> {
  const token = await encode({
    token: { userId: user.id, role: user.role, name: user.name, email: user.email, sub: String(user.id) },
    secret: process.env.NEXTAUTH_SECRET!,
  });
  jar.set("next-auth.session-token", token);
}

/** Puts a raw session token in the jar (e.g. one signed with another secret). */
export function setRawSessionToken(token: string): void {
  jar.set("next-auth.session-token", token);
}

/** Signs out (no cookie). */
export function signOut(): void {
  jar.clear();
}
