/**
 * Sign-in: throttled per account and per address, refused attempts recorded in the audit trail;
 * unknown, deactivated and wrong-password accounts answered alike (same answer, one bcrypt
 * comparison each, so the same work and about the same time); /api/auth/session (next-auth's
 * session callback) shows no user for a deactivated account. Limits are our own (app/lib/sign-in-guard.ts).
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import bcrypt from "bcryptjs";
import { afterAll, beforeAll, beforeEach, describe, expect, it, vi } from "vitest";

import { closeDb, getDb } from "@/db/client";
import { seedDemoUsers } from "@/db/seed";
import { createUser, getUserByEmail, setUserActive } from "@/db/queries/users";
import { listAudit } from "@/db/queries/audit";
import { getAuthOptions } from "@/app/lib/auth-options";
import { ACCOUNT_ATTEMPTS, ADDRESS_ATTEMPTS, resetSignInThrottle } from "@/app/lib/sign-in-guard";
import { signInErrorMessage, THROTTLED_PREFIX } from "@/app/lib/sign-in-messages";

let tmp: string;
const PASSWORD = "correct horse battery";
type Authorize = (c: Record<string, string>, req: { headers: Record<string, string> }) => Promise<{ id: string } | null>;
let authorize: Authorize;

const from = (address: string) => ({ headers: { "x-forwarded-for": address } });

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-signin-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  process.env.NEXTAUTH_SECRET = "sign-in-throttle-test-secret-0123456789abcdef";
  const db = getDb();
  seedDemoUsers(db);
  createUser(db, { email: "rowan@example.org", name: "Rowan Pike", role: "processor", password: PASSWORD });
  createUser(db, { email: "gone@example.org", name: "Ada Gone", role: "processor", password: PASSWORD });
  setUserActive(db, getUserByEmail(db, "gone@example.org")!.id, false);
  const provider = getAuthOptions().providers[0] as unknown as { options: { authorize: Authorize } };
  authorize = provider.options.authorize;
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

beforeEach(async () => {
  await resetSignInThrottle({ accounts: ["rowan@example.org", "gone@example.org"], addresses: ["10.0.0.1", "10.0.0.2", "10.0.0.3"] });
});

describe("throttling", () => {
  it(`after ${ACCOUNT_ATTEMPTS} wrong passwords the right one is refused too, and the refusal is audited`, async () => {
    for (let i = 0; i < ACCOUNT_ATTEMPTS; i++) {
      // A different address each time: the account's own count is what stops it.
      expect(await authorize({ email: "rowan@example.org", password: `wrong-${i}` }, from(`10.1.0.${i}`))).toBeNull();
    }
    const err = await authorize({ email: "Rowan@Example.org", password: PASSWORD }, from("10.0.0.1")).catch((e: Error) => e);
    expect(err).toBeInstanceOf(Error);
    expect((err as Error).message.startsWith(THROTTLED_PREFIX)).toBe(true);
    expect(signInErrorMessage((err as Error).message)).toMatch(/^Too many sign-in attempts\. Try again in 15 minutes\.$/);
    const events = listAudit(getDb(), { action: "sign-in.throttled" });
    expect(events[0]).toMatchObject({ actorLabel: "10.0.0.1", door: "web", entityType: "user", entityId: String(getUserByEmail(getDb(), "rowan@example.org")!.id) });
    expect(JSON.parse(events[0].afterJson!)).toMatchObject({ email: "rowan@example.org", address: "10.0.0.1" });
  });

  it("a right password before the limit signs in and clears the account's count", async () => {
    for (let i = 0; i < ACCOUNT_ATTEMPTS - 1; i++) await authorize({ email: "rowan@example.org", password: "nope" }, from("10.0.0.2"));
    expect(await authorize({ email: "rowan@example.org", password: PASSWORD }, from("10.0.0.2"))).toMatchObject({ email: "rowan@example.org" });
    for (let i = 0; i < ACCOUNT_ATTEMPTS - 1; i++) await authorize({ email: "rowan@example.org", password: "nope" }, from("10.0.0.2"));
    expect(await authorize({ email: "rowan@example.org", password: PASSWORD }, from("10.0.0.2"))).not.toBeNull();
  });

  it(`one address trying ${ADDRESS_ATTEMPTS} accounts is stopped, even for a right password`, async () => {
    for (let i = 0; i < ADDRESS_ATTEMPTS; i++) await authorize({ email: `nobody${i}@example.org`, password: "guess" }, from("10.0.0.3"));
    await expect(authorize({ email: "rowan@example.org", password: PASSWORD }, from("10.0.0.3"))).rejects.toThrow(THROTTLED_PREFIX);
    expect(await authorize({ email: "rowan@example.org", password: PASSWORD }, from("10.0.0.1"))).not.toBeNull();
  });
});

describe("no account enumeration", () => {
  it("unknown, deactivated and wrong password: the same null answer after exactly one bcrypt comparison", async () => {
    const spy = vi.spyOn(bcrypt, "compare");
    try {
      for (const email of ["unknown@example.org", "gone@example.org", "rowan@example.org"]) {
        spy.mockClear();
        const password = email === "rowan@example.org" ? "wrong password" : PASSWORD;
        expect(await authorize({ email, password }, from("10.0.0.2")), email).toBeNull();
        expect(spy, email).toHaveBeenCalledTimes(1);
      }
    } finally {
      spy.mockRestore();
    }
  });
});

describe("/api/auth/session for a deactivated account", () => {
  it("shows no user once the account is deactivated, and the current role before", async () => {
    const db = getDb();
    const u = getUserByEmail(db, "rowan@example.org")!;
    const session = getAuthOptions().callbacks!.session!;
    const call = () =>
      session({ session: { expires: "2099-01-01T00:00:00.000Z", user: { name: u.name, email: u.email } }, token: { userId: u.id, role: "admin" } } as never) as unknown as Promise<{ user?: { role: string } }>;
    expect((await call()).user).toMatchObject({ role: "processor" });
    setUserActive(db, u.id, false);
    try {
      expect((await call()).user).toBeUndefined();
    } finally {
      setUserActive(db, u.id, true);
    }
  });
});
