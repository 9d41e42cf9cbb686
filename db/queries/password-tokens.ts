/**
 * Mailed links that set a password (a forgotten-password reset, an invitation). The link carries
 * a random 256-bit token; only its SHA-256 is stored, so a copy of the database does not hold
 * working links. A link works once and until it expires; using it also retires the person's
 * other open links.
 */
import crypto from "node:crypto";
import { and, eq, gte, isNull } from "drizzle-orm";
import { writeTransaction, type Db } from "../client";
import { RecordError } from "../errors";
import { passwordTokens, users } from "../schema";
import { setUserPassword } from "./users";

export type PasswordTokenPurpose = "reset" | "invitation";

/** How long a link works, ms: a reset one hour, an invitation seven days (common practice). */
export const TOKEN_LIFETIME_MS: Record<PasswordTokenPurpose, number> = { reset: 60 * 60_000, invitation: 7 * 24 * 60 * 60_000 };

const hashToken = (token: string) => crypto.createHash("sha256").update(token, "utf8").digest("hex");

/** Issues a link token for a user; returns the token to put in the link (it is not stored). */
export function issuePasswordToken(db: Db, userId: number, purpose: PasswordTokenPurpose, now = new Date()): { token: string; expiresAt: Date } {
  const token = crypto.randomBytes(32).toString("base64url");
  const expiresAt = new Date(now.getTime() + TOKEN_LIFETIME_MS[purpose]);
  db.insert(passwordTokens).values({ userId, purpose, tokenHash: hashToken(token), createdAt: now, expiresAt }).run();
  return { token, expiresAt };
}

/** How many links of `purpose` were issued to a user since `since` (to refuse a flood of reset mails). */
export function countRecentTokens(db: Db, userId: number, purpose: PasswordTokenPurpose, since: Date): number {
  return db
    .select({ id: passwordTokens.id })
    .from(passwordTokens)
    .where(and(eq(passwordTokens.userId, userId), eq(passwordTokens.purpose, purpose), gte(passwordTokens.createdAt, since)))
    .all().length;
}

/** Why a link does not work. */
export type TokenProblem = "unknown" | "used" | "expired" | "deactivated";

/** What a link stands for, or why it does not work. */
export function checkPasswordToken(
  db: Db,
  token: string,
  now = new Date(),
): { ok: true; userId: number; name: string; email: string; purpose: PasswordTokenPurpose } | { ok: false; problem: TokenProblem } {
  if (typeof token !== "string" || token.length < 20 || token.length > 200) return { ok: false, problem: "unknown" };
  const row = db
    .select({ t: passwordTokens, name: users.name, email: users.email, active: users.active })
    .from(passwordTokens)
    .innerJoin(users, eq(users.id, passwordTokens.userId))
    .where(eq(passwordTokens.tokenHash, hashToken(token)))
    .get();
  if (!row) return { ok: false, problem: "unknown" };
  if (row.t.usedAt) return { ok: false, problem: "used" };
  if (row.t.expiresAt.getTime() <= now.getTime()) return { ok: false, problem: "expired" };
  if (!row.active) return { ok: false, problem: "deactivated" };
  return { ok: true, userId: row.t.userId, name: row.name, email: row.email, purpose: row.t.purpose };
}

/** Words for a link that does not work. */
export const TOKEN_PROBLEM_MESSAGES: Record<TokenProblem, string> = {
  unknown: "This link is not valid. Copy the whole link from the mail, or ask for a new one.",
  used: "This link was used already: each link sets a password once. Ask for a new one if you need it.",
  expired: "This link has expired. Ask for a new one.",
  deactivated: "This account is deactivated; ask an administrator.",
};

/**
 * Sets the password through a link: checks the token, marks it and every other open link of the
 * person used, and sets the password (not temporary), in one transaction. RecordError "conflict"
 * naming the problem when the link does not work.
 */
export function usePasswordToken(db: Db, token: string, password: string, now = new Date()): { userId: number; purpose: PasswordTokenPurpose } {
  return writeTransaction(db, (tx) => {
    const c = checkPasswordToken(tx, token, now);
    if (!c.ok) throw new RecordError("conflict", TOKEN_PROBLEM_MESSAGES[c.problem], "token");
    tx.update(passwordTokens)
      .set({ usedAt: now })
      .where(and(eq(passwordTokens.userId, c.userId), isNull(passwordTokens.usedAt)))
      .run();
    setUserPassword(tx, c.userId, password);
    return { userId: c.userId, purpose: c.purpose };
  });
}
