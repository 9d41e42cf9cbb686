/**
 * First gate for every request (Next 16's proxy, Node runtime):
 *
 * - security headers on every page: a content security policy whose scripts must carry a nonce
 *   made fresh for each request (Next.js reads it from the request's policy header and puts it on
 *   its own scripts), `frame-ancestors 'none'`; the static headers (nosniff, Referrer-Policy,
 *   X-Frame-Options) come from next.config.mjs;
 * - a path whose %-escapes do not decode is answered 400 here, not as a plain-text 500 later;
 * - people who are not signed in are sent to the sign-in page, API calls without a session
 *   answer 401. This is only a convenience: every route handler and server action still checks
 *   the role itself.
 */
import { NextResponse, type NextRequest } from "next/server";
import { getToken } from "next-auth/jwt";
import { authSecret } from "@/app/lib/auth-secret";

/** Paths anyone may reach without a session: the sign-in page, the password-link pages and next-auth's own routes. */
export function isPublicPath(pathname: string): boolean {
  return (
    ["/sign-in", "/forgot-password", "/set-password", "/api/auth"].some((p) => pathname === p || pathname.startsWith(`${p}/`))
  );
}

/**
 * The content security policy of a page answered with `nonce`. Styles stay 'unsafe-inline':
 * React's style attributes and next/font's style tags have no nonce; scripts do not. Development
 * adds 'unsafe-eval', which React's development build needs.
 */
export function contentSecurityPolicy(nonce: string, dev = process.env.NODE_ENV === "development"): string {
  return [
    "default-src 'self'",
    `script-src 'self' 'nonce-${nonce}' 'strict-dynamic'${dev ? " 'unsafe-eval'" : ""}`,
    "style-src 'self' 'unsafe-inline'",
    "img-src 'self' data: blob:",
    "font-src 'self'",
    "connect-src 'self'",
    "worker-src 'self' blob:",
    "object-src 'none'",
    "base-uri 'self'",
    "form-action 'self'",
    "frame-ancestors 'none'",
  ].join("; ");
}

function jsonError(status: number, code: string, message: string): NextResponse {
  return NextResponse.json({ error: { code, message } }, { status });
}

export async function proxy(request: NextRequest) {
  const { pathname, search } = request.nextUrl;
  try {
    decodeURIComponent(request.nextUrl.pathname);
  } catch {
    return jsonError(400, "bad-input", "The address holds a %-escape that does not decode (e.g. %E0%A4%A); check the link.");
  }
  const nonce = btoa(crypto.randomUUID());
  const csp = contentSecurityPolicy(nonce);
  const pass = () => {
    const headers = new Headers(request.headers);
    headers.set("x-nonce", nonce);
    headers.set("content-security-policy", csp);
    const res = NextResponse.next({ request: { headers } });
    res.headers.set("content-security-policy", csp);
    return res;
  };
  if (isPublicPath(pathname)) return pass();
  const token = await getToken({ req: request, secret: authSecret() });
  if (token) return pass();
  if (pathname.startsWith("/api/")) return jsonError(401, "forbidden", "Sign in to continue.");
  const url = request.nextUrl.clone();
  url.pathname = "/sign-in";
  url.search = pathname === "/" ? "" : `?next=${encodeURIComponent(pathname + search)}`;
  return NextResponse.redirect(url);
}

export const config = {
  matcher: ["/((?!_next/static|_next/image|favicon.ico|icon.svg).*)"],
};
