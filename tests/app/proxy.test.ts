/**
 * The proxy (Next 16's request gate): the sign-in gate (401 for the API, redirect for pages,
 * public sign-in and next-auth routes), a content security policy with a fresh nonce on every
 * page (CSP Level 3: 'nonce-…' with 'strict-dynamic', frame-ancestors 'none'), and a 400 JSON
 * answer for a path whose %-escapes do not decode (RFC 3986 §2.1 percent-encoding).
 */
import { encode } from "next-auth/jwt";
import { NextRequest } from "next/server";
import { beforeAll, describe, expect, it } from "vitest";
import { contentSecurityPolicy, isPublicPath, proxy } from "@/proxy";

const ORIGIN = "http://127.0.0.1:3000";
let token: string;

beforeAll(async () => {
  process.env.NEXTAUTH_SECRET = "proxy-test-secret-0123456789abcdef";
  token = await encode({ token: { userId: 1, role: "admin", sub: "1" }, secret: process.env.NEXTAUTH_SECRET });
});

const req = (p: string, signedIn = false) => new NextRequest(`${ORIGIN}${p}`, { headers: signedIn ? { cookie: `next-auth.session-token=${token}` } : {} });

describe("sign-in gate", () => {
  it("answers 401 JSON for the API and sends pages to /sign-in with the way back", async () => {
    const api = await proxy(req("/api/runs"));
    expect(api.status).toBe(401);
    expect(await api.json()).toMatchObject({ error: { message: "Sign in to continue." } });
    const page = await proxy(req("/runs/7?step=scale"));
    expect(page.status).toBe(307);
    expect(new URL(page.headers.get("location")!).pathname + new URL(page.headers.get("location")!).search).toBe("/sign-in?next=%2Fruns%2F7%3Fstep%3Dscale");
  });

  it("lets a signed-in person through, and the sign-in page and next-auth's routes without a session", async () => {
    for (const [p, signedIn] of [["/runs", true], ["/api/runs", true], ["/sign-in", false], ["/api/auth/session", false]] as const) {
      const res = await proxy(req(p, signedIn));
      expect(res.status, p).toBe(200);
      expect(res.headers.get("x-middleware-next"), p).toBe("1");
    }
    expect(isPublicPath("/sign-inx")).toBe(false);
    expect(isPublicPath("/api/authx")).toBe(false);
  });
});

describe("security headers", () => {
  it("every page gets a policy with a fresh nonce, also handed to Next.js on the request", async () => {
    const a = await proxy(req("/runs", true));
    const b = await proxy(req("/runs", true));
    const csp = a.headers.get("content-security-policy")!;
    const nonce = /'nonce-([A-Za-z0-9+/=]+)'/.exec(csp)![1];
    expect(nonce.length).toBeGreaterThanOrEqual(16);
    expect(b.headers.get("content-security-policy")).not.toContain(nonce);
    // NextResponse.next({ request: { headers } }) passes overridden request headers this way.
    expect(a.headers.get("x-middleware-request-content-security-policy")).toBe(csp);
    expect(a.headers.get("x-middleware-request-x-nonce")).toBe(nonce);
    expect(csp).toContain("frame-ancestors 'none'");
    expect(csp).toContain("object-src 'none'");
    expect(csp).toMatch(/script-src 'self' 'nonce-[^']+' 'strict-dynamic'(;|$)/);
    expect(contentSecurityPolicy("n", true)).toContain("'unsafe-eval'");
  });
});

describe("malformed addresses", () => {
  it("a %-escape that does not decode is a 400 JSON answer naming the problem", async () => {
    for (const p of ["/api/artifacts/%E0%A4%A/traces", "/runs/%zz"]) {
      const res = await proxy(req(p, true));
      expect(res.status, p).toBe(400);
      expect((await res.json()).error.message).toMatch(/%-escape that does not decode/);
    }
  });
});
