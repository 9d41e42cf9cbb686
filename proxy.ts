/**
 * First gate for every request (Next 16's proxy, Node runtime): people who are not signed in
 * are sent to the sign-in page, API calls without a session answer 401. This is only a
 * convenience: every route handler and server action still checks the role itself.
 */
import { NextResponse, type NextRequest } from "next/server";
import { getToken } from "next-auth/jwt";
import { authSecret } from "@/app/lib/auth-secret";

export async function proxy(request: NextRequest) {
  const token = await getToken({ req: request, secret: authSecret() });
  if (token) return NextResponse.next();
  const { pathname, search } = request.nextUrl;
  if (pathname.startsWith("/api/")) {
    return NextResponse.json({ error: { code: "forbidden", message: "Sign in to continue." } }, { status: 401 });
  }
  const url = request.nextUrl.clone();
  url.pathname = "/sign-in";
  url.search = pathname === "/" ? "" : `?next=${encodeURIComponent(pathname + search)}`;
  return NextResponse.redirect(url);
}

export const config = {
  matcher: ["/((?!api/auth|sign-in|_next/static|_next/image|favicon.ico|icon.svg).*)"],
};
