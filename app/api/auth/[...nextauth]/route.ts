import NextAuth from "next-auth";
import { NextRequest } from "next/server";
import { getAuthOptions } from "@/app/lib/auth-options";
import { safeAuthRedirect } from "@/app/lib/safe-redirect";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

type Context = { params: Promise<{ nextauth: string[] }> };

/**
 * The request with a `callbackUrl` query parameter that stays on this site: next-auth checks it
 * before any callback and answers a malformed or foreign one with its configuration error page.
 */
export function withSafeCallbackUrl(req: NextRequest): NextRequest {
  const url = new URL(req.url);
  const raw = url.searchParams.get("callbackUrl");
  if (raw === null) return req;
  const safe = safeAuthRedirect(raw, url.origin);
  if (safe === raw) return req;
  // A path: NextRequest may spell the host differently (localhost for 127.0.0.1) from NEXTAUTH_URL.
  const target = new URL(safe);
  url.searchParams.set("callbackUrl", `${target.pathname}${target.search}${target.hash}`);
  return new NextRequest(url, req);
}

async function handler(req: NextRequest, context: Context) {
  return NextAuth(getAuthOptions())(withSafeCallbackUrl(req) as never, context as never) as Promise<Response>;
}

export { handler as GET, handler as POST };
