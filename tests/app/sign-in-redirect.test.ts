/**
 * After sign-in only a path of this site is followed. Reference: the WHATWG URL Standard's
 * parser (as in Node's URL and every current browser) reads "\" as "/" in special URLs and strips
 * ASCII tab and newline, so "/\evil.example" and "/<TAB>/evil.example" are scheme-relative URLs
 * of another host.
 */
import { isValidElement, type ReactElement, type ReactNode } from "react";
import { describe, expect, it } from "vitest";
import { safeAuthRedirect, safeNextPath } from "@/app/lib/safe-redirect";
import SignInPage from "@/app/sign-in/page";
import { SignInForm } from "@/app/ui/auth/sign-in-form";

/** The `next` prop the page hands to the sign-in form. */
function formNext(tree: ReactNode): string | undefined {
  if (!isValidElement(tree)) return undefined;
  const el = tree as ReactElement<{ next?: string; children?: ReactNode }>;
  if (el.type === SignInForm) return el.props.next;
  const kids = el.props.children;
  for (const k of Array.isArray(kids) ? kids : [kids]) {
    const found = formNext(k as ReactNode);
    if (found !== undefined) return found;
  }
  return undefined;
}

const hostile = ["/\\evil.example", "/\t/evil.example", "/\n/evil.example", "//evil.example", "/\\/evil.example", "https://evil.example/runs", "javascript:alert(1)", "/%5Cevil.example".replace("%5C", "\\"), " /runs"];

describe("where the sign-in page sends people", () => {
  it("the browser's parser agrees that the hostile values leave the site", () => {
    for (const raw of hostile.slice(0, 5)) expect(new URL(raw, "http://127.0.0.1:3000").host, JSON.stringify(raw)).toBe("evil.example");
  });

  it("keeps paths of this site with their query and fragment", () => {
    expect(safeNextPath("/runs/7?step=scale#log")).toBe("/runs/7?step=scale#log");
    expect(safeNextPath("/audit")).toBe("/audit");
  });

  it("refuses everything that leaves the site, falling back to /runs", () => {
    for (const raw of hostile) expect(safeNextPath(raw), JSON.stringify(raw)).toBe("/runs");
    expect(safeNextPath(undefined)).toBe("/runs");
  });

  it("the page hands the form a same-site path only", async () => {
    for (const raw of hostile) {
      const tree = await SignInPage({ searchParams: Promise.resolve({ next: raw }) });
      expect(formNext(tree), JSON.stringify(raw)).toBe("/runs");
    }
    expect(formNext(await SignInPage({ searchParams: Promise.resolve({ next: "/runs/3" }) }))).toBe("/runs/3");
  });

  it("next-auth's callbackUrl: foreign or malformed goes home, same origin stays", () => {
    const base = "http://127.0.0.1:3000";
    expect(safeAuthRedirect("/runs/4", base)).toBe(`${base}/runs/4`);
    expect(safeAuthRedirect(`${base}/audit?x=1`, base)).toBe(`${base}/audit?x=1`);
    for (const url of ["https://evil.example/", "/\\evil.example", "//evil.example", "http://127.0.0.1:4000/runs", "http://[::1", "%E0%A4%A"]) {
      const out = safeAuthRedirect(url, base);
      expect(new URL(out).origin, url).toBe(base);
    }
  });
});

describe("next-auth's callbackUrl query parameter", () => {
  it("is replaced by a same-site URL before next-auth sees it (a malformed one gave its configuration error page)", async () => {
    const { NextRequest } = await import("next/server");
    const { withSafeCallbackUrl } = await import("@/app/api/auth/[...nextauth]/route");
    const base = "http://127.0.0.1:3000";
    for (const cb of ["%E0%A4%A", "https://evil.example/x", "/\\evil.example"]) {
      const out = withSafeCallbackUrl(new NextRequest(`${base}/api/auth/signin?callbackUrl=${encodeURIComponent(cb)}`));
      const kept = new URL(out.url).searchParams.get("callbackUrl")!;
      // next-auth accepts a callbackUrl that is absolute or starts with "/" (else its error page).
      expect(kept.startsWith("/") && !kept.startsWith("//"), `${cb} -> ${kept}`).toBe(true);
      expect(new URL(kept, base).origin, cb).toBe(base);
    }
    const same = new NextRequest(`${base}/api/auth/signin?callbackUrl=${encodeURIComponent("/runs/2")}`);
    expect(new URL(withSafeCallbackUrl(same).url).searchParams.get("callbackUrl")).toBe("/runs/2");
  });
});
