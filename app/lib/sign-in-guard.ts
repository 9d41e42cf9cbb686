/**
 * Sign-in with throttling: failed attempts are counted per account (normalised email, known or
 * not) and per address, with rate-limiter-flexible's in-memory limiter (one `next start` process
 * serves the control room). Past the limit every attempt is refused, the right password
 * included, until the window has passed, and each refused attempt is written to the audit trail.
 * Unknown, deactivated and wrong-password accounts get the same answer in about the same time
 * (one bcrypt comparison each, db/queries/users.ts).
 */
import "server-only";
import { RateLimiterMemory } from "rate-limiter-flexible";
import type { Db } from "@/db/client";
import { recordAudit } from "@/db/queries/audit";
import { getUserByEmail, normaliseEmail, verifyCredentials, type UserRow } from "@/db/queries/users";

/** Failed attempts allowed per account in {@link WINDOW_S} before it is locked for the rest of the window. */
export const ACCOUNT_ATTEMPTS = 10;
/** Failed attempts allowed per address in {@link WINDOW_S} (a crew may share one address). */
export const ADDRESS_ATTEMPTS = 50;
/** Counting window and lock time, s. */
export const WINDOW_S = 15 * 60;

const byAccount = new RateLimiterMemory({ keyPrefix: "sign-in-account", points: ACCOUNT_ATTEMPTS, duration: WINDOW_S, blockDuration: WINDOW_S });
const byAddress = new RateLimiterMemory({ keyPrefix: "sign-in-address", points: ADDRESS_ATTEMPTS, duration: WINDOW_S, blockDuration: WINDOW_S });

export type SignInOutcome = { kind: "ok"; user: UserRow } | { kind: "refused" } | { kind: "throttled"; retryAfterS: number };

/** The client address of a request as seen by the nearest proxy (the last X-Forwarded-For entry Next.js adds). */
export function clientAddress(headers: Record<string, string | string[] | undefined> | Headers | undefined): string {
  const raw = headers instanceof Headers ? headers.get("x-forwarded-for") : headers?.["x-forwarded-for"];
  const value = Array.isArray(raw) ? raw.join(",") : raw;
  const last = value?.split(",").map((s) => s.trim()).filter(Boolean).pop();
  return last ? last.slice(0, 64) : "unknown";
}

async function lockedFor(limiter: RateLimiterMemory, key: string, points: number): Promise<number> {
  const res = await limiter.get(key);
  return res && res.consumedPoints >= points ? Math.ceil(res.msBeforeNext / 1000) : 0;
}

async function countFailure(limiter: RateLimiterMemory, key: string): Promise<void> {
  try {
    await limiter.consume(key);
  } catch {
    // Over the limit: the key is now blocked; the next attempt is refused before checking.
  }
}

/**
 * Checks an email and password with throttling. Refusals do not say whether the account exists
 * or is deactivated; a throttled attempt is recorded in the audit trail ("sign-in.throttled").
 */
export async function signInWithThrottle(db: Db, email: string, password: string, address: string): Promise<SignInOutcome> {
  const account = normaliseEmail(email).slice(0, 320);
  const wait = Math.max(await lockedFor(byAccount, account, ACCOUNT_ATTEMPTS), await lockedFor(byAddress, address, ADDRESS_ATTEMPTS));
  if (wait > 0) {
    const known = getUserByEmail(db, account);
    recordAudit(db, {
      actor: { userId: null, label: address, door: "web" },
      action: "sign-in.throttled",
      entityType: "user",
      entityId: known ? known.id : account,
      after: { email: account, address, retryAfterS: wait },
    });
    return { kind: "throttled", retryAfterS: wait };
  }
  const user = await verifyCredentials(db, account, password);
  if (!user) {
    await countFailure(byAccount, account);
    await countFailure(byAddress, address);
    return { kind: "refused" };
  }
  await byAccount.delete(account);
  return { kind: "ok", user };
}

/** Forgets all counts (tests). */
export async function resetSignInThrottle(keys: { accounts?: string[]; addresses?: string[] }): Promise<void> {
  for (const a of keys.accounts ?? []) await byAccount.delete(normaliseEmail(a));
  for (const a of keys.addresses ?? []) await byAddress.delete(a);
}
