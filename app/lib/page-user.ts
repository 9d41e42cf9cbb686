/**
 * Page-side access: the signed-in user or a redirect to the sign-in page, and a permission
 * check that shows the "not allowed" page. Pages only hide what a role cannot do; the route
 * handlers and server actions enforce it.
 */
import "server-only";
import { forbidden, redirect } from "next/navigation";
import { can, type Permission } from "./permissions";
import { getSessionUser, type SessionUser } from "./session";

/** The signed-in user, or a redirect to /sign-in (or to /change-password while the password is a temporary one). */
export async function pageUser(): Promise<SessionUser> {
  const user = await getSessionUser();
  if (!user) redirect("/sign-in");
  if (user.mustChangePassword) redirect("/change-password");
  return user;
}

/** The signed-in user holding `permission`, or the 403 page. */
export async function pageUserWith(permission: Permission): Promise<SessionUser> {
  const user = await pageUser();
  if (!can(user.role, permission)) forbidden();
  return user;
}
