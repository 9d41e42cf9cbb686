/**
 * The signed-in person, read from the next-auth session cookie, and the one permission check
 * used by every route handler, server action and page. The role is re-read from the database
 * on each request so that a role change or a deactivation applies at once.
 */
import "server-only";
import { cookies } from "next/headers";
import { decode } from "next-auth/jwt";
import { getDb } from "@/db/client";
import { getUserById } from "@/db/queries/users";
import type { Role } from "@/db/schema";
import { AppError } from "@/pipeline/errors";
import { authSecret } from "./auth-secret";
import { can, forbiddenMessage, type Permission } from "./permissions";

/** The person behind a request. */
export interface SessionUser {
  id: number;
  email: string;
  name: string;
  role: Role;
  /** Signed in with an administrator-issued temporary password: must choose their own before anything else. */
  mustChangePassword: boolean;
}

/** Thrown when nobody is signed in (answers 401). */
export class SignInRequiredError extends AppError {
  constructor() {
    super("forbidden", "Sign in to continue.");
    this.name = "SignInRequiredError";
  }
  override get httpStatus(): number {
    return 401;
  }
}

const SESSION_COOKIES = ["__Secure-next-auth.session-token", "next-auth.session-token"];

/** The signed-in, active user, or null. */
export async function getSessionUser(): Promise<SessionUser | null> {
  const jar = await cookies();
  let raw: string | undefined;
  for (const name of SESSION_COOKIES) {
    raw = jar.get(name)?.value;
    if (raw) break;
  }
  if (!raw) return null;
  let token;
  try {
    token = await decode({ token: raw, secret: authSecret() });
  } catch {
    return null;
  }
  if (!token || typeof token.userId !== "number") return null;
  if (typeof token.exp === "number" && token.exp * 1000 < Date.now()) return null;
  const user = getUserById(getDb(), token.userId);
  if (!user || !user.active) return null;
  return { id: user.id, email: user.email, name: user.name, role: user.role, mustChangePassword: user.mustChangePassword };
}

/**
 * The one check: returns the signed-in user when their role holds `permission`; throws
 * SignInRequiredError (401) or AppError "forbidden" (403) with a message otherwise.
 */
export async function requirePermission(permission: Permission): Promise<SessionUser> {
  const user = await requireSignedIn();
  if (user.mustChangePassword) {
    throw new AppError("forbidden", "Choose your own password first: the one you signed in with was temporary (go to /change-password).");
  }
  if (!can(user.role, permission)) throw new AppError("forbidden", forbiddenMessage(user.role, permission));
  return user;
}

/** The signed-in, active user whatever their role (also one who must still change a temporary password); 401 otherwise. */
export async function requireSignedIn(): Promise<SessionUser> {
  const user = await getSessionUser();
  if (!user) throw new SignInRequiredError();
  return user;
}

/** The engine's actor for something started from the web by `user`. */
export function webActor(user: SessionUser): { userId: number; label: string; door: "web" } {
  return { userId: user.id, label: user.name, door: "web" };
}
