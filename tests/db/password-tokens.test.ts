/**
 * Password links (db/queries/password-tokens.ts): a link works once and until it expires, only a
 * hash of its token is stored, and using one retires the person's other open links. The hash is
 * SHA-256 (FIPS 180-4), checked against Node's own crypto; the lifetimes (one hour for a reset,
 * seven days for an invitation) are common practice.
 */
import crypto from "node:crypto";
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../db/client";
import { checkPasswordToken, issuePasswordToken, TOKEN_LIFETIME_MS, usePasswordToken } from "../../db/queries/password-tokens";
import { createUser, setUserActive, verifyCredentials, type UserRow } from "../../db/queries/users";
import { passwordTokens } from "../../db/schema";

let tmp: string;
let db: Db;
let user: UserRow;

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-tokens-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  db = getDb();
  user = createUser(db, { email: "rosa@example.org", name: "Rosa", role: "lead", password: "rosa-first-password" });
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("password links", () => {
  it("store only the SHA-256 of a 256-bit token", () => {
    const { token } = issuePasswordToken(db, user.id, "reset");
    expect(Buffer.from(token, "base64url")).toHaveLength(32);
    const stored = db.select().from(passwordTokens).all().map((r) => r.tokenHash);
    expect(stored).toContain(crypto.createHash("sha256").update(token).digest("hex"));
    expect(stored.join()).not.toContain(token);
  });

  it("work once: the password is set, and a second use is refused as used", async () => {
    const t0 = new Date("2026-12-02T08:00:00Z");
    const { token } = issuePasswordToken(db, user.id, "reset", t0);
    expect(checkPasswordToken(db, token, t0)).toMatchObject({ ok: true, userId: user.id, purpose: "reset", email: "rosa@example.org" });
    usePasswordToken(db, token, "rosa-second-password", new Date(t0.getTime() + 60_000));
    expect(await verifyCredentials(db, "rosa@example.org", "rosa-second-password")).not.toBeNull();
    expect(checkPasswordToken(db, token, t0)).toEqual({ ok: false, problem: "used" });
    expect(() => usePasswordToken(db, token, "rosa-third-password", t0)).toThrow(/used already/);
    expect(await verifyCredentials(db, "rosa@example.org", "rosa-third-password")).toBeNull();
  });

  it("expire: a reset link works until one hour after it was issued, not at that instant", () => {
    const t0 = new Date("2026-12-02T08:00:00Z");
    const { token, expiresAt } = issuePasswordToken(db, user.id, "reset", t0);
    expect(expiresAt.getTime() - t0.getTime()).toBe(60 * 60 * 1000);
    expect(checkPasswordToken(db, token, new Date(expiresAt.getTime() - 1)).ok).toBe(true);
    expect(checkPasswordToken(db, token, expiresAt)).toEqual({ ok: false, problem: "expired" });
    expect(() => usePasswordToken(db, token, "too-late-password", new Date(expiresAt.getTime() + 1000))).toThrow(/expired/);
    expect(TOKEN_LIFETIME_MS.invitation).toBe(7 * 24 * 60 * 60 * 1000);
  });

  it("using one link retires the person's other open links", () => {
    const a = issuePasswordToken(db, user.id, "reset");
    const b = issuePasswordToken(db, user.id, "reset");
    usePasswordToken(db, b.token, "rosa-fourth-password");
    expect(checkPasswordToken(db, a.token)).toEqual({ ok: false, problem: "used" });
  });

  it("refuse unknown tokens and deactivated accounts", () => {
    expect(checkPasswordToken(db, "x".repeat(43))).toEqual({ ok: false, problem: "unknown" });
    expect(checkPasswordToken(db, "")).toEqual({ ok: false, problem: "unknown" });
    const { token } = issuePasswordToken(db, user.id, "invitation");
    setUserActive(db, user.id, false);
    expect(checkPasswordToken(db, token)).toEqual({ ok: false, problem: "deactivated" });
    setUserActive(db, user.id, true);
  });
});
