/**
 * People who may sign in to the control room. Users are never deleted: a deactivated user
 * keeps their name in runs, reviews and the audit trail.
 */
import { and, asc, eq } from "drizzle-orm";
import crypto from "node:crypto";
import bcrypt from "bcryptjs";
import type { Db } from "../client";
import { users, type Role } from "../schema";
import { RecordError } from "../errors";

/** A user as shown to people (no password hash). */
export interface UserRow {
  id: number;
  email: string;
  name: string;
  role: Role;
  active: boolean;
  /** An administrator issued a temporary password: the user must choose their own before going on. */
  mustChangePassword: boolean;
  createdAt: Date;
}

/** bcrypt cost factor: 10 rounds is the bcryptjs default and signs in well under 100 ms here. */
const BCRYPT_ROUNDS = 10;

function toRow(u: typeof users.$inferSelect): UserRow {
  return { id: u.id, email: u.email, name: u.name, role: u.role, active: u.active, mustChangePassword: u.mustChangePassword, createdAt: u.createdAt };
}

/** Normalises an email for lookups and storage (trimmed, lower case). */
export function normaliseEmail(email: string): string {
  return email.trim().toLowerCase();
}

/** All users, active first, then by name. */
export function listUsers(db: Db): UserRow[] {
  return db
    .select()
    .from(users)
    .orderBy(asc(users.name))
    .all()
    .map(toRow)
    .sort((a, b) => Number(b.active) - Number(a.active));
}

/** One user by id, or null. */
export function getUserById(db: Db, id: number): UserRow | null {
  const u = db.select().from(users).where(eq(users.id, id)).get();
  return u ? toRow(u) : null;
}

/** One user by email, or null. */
export function getUserByEmail(db: Db, email: string): UserRow | null {
  const u = db.select().from(users).where(eq(users.email, normaliseEmail(email))).get();
  return u ? toRow(u) : null;
}

/**
 * The user a command-line name stands for: an e-mail exactly, else the one user whose e-mail's
 * part before "@" equals the name (case-insensitive; an OS login such as "mhale" for
 * mhale@example.org). Null when none or several match.
 */
export function findUserByLoginName(db: Db, name: string): UserRow | null {
  const wanted = name.trim().toLowerCase();
  if (wanted === "") return null;
  if (wanted.includes("@")) return getUserByEmail(db, wanted);
  const matches = db
    .select()
    .from(users)
    .all()
    .filter((u) => u.email.slice(0, u.email.indexOf("@")).toLowerCase() === wanted);
  return matches.length === 1 ? toRow(matches[0]) : null;
}

/** True when at least one active administrator exists (otherwise the command line may add the first). */
export function hasActiveAdmin(db: Db): boolean {
  return db
    .select({ id: users.id })
    .from(users)
    .where(and(eq(users.role, "admin"), eq(users.active, true)))
    .limit(1)
    .all().length > 0;
}

/**
 * Checks an email and password. Returns the user when the password matches and the account is
 * active, else null (the caller does not learn which of the two failed).
 */
export async function verifyCredentials(db: Db, email: string, password: string): Promise<UserRow | null> {
  const u = db.select().from(users).where(eq(users.email, normaliseEmail(email))).get();
  // One bcrypt comparison whatever the account: unknown and deactivated accounts take as long as a
  // wrong password, so the time of the answer does not tell which accounts exist.
  const ok = await bcrypt.compare(password, u?.passwordHash ?? standInHash());
  return u && u.active && ok ? toRow(u) : null;
}

let standIn: string | undefined;
/** A hash of a random password at the same cost, compared against for unknown accounts. */
function standInHash(): string {
  standIn ??= bcrypt.hashSync(crypto.randomBytes(18).toString("base64url"), BCRYPT_ROUNDS);
  return standIn;
}

/**
 * Adds a user with a bcrypt-hashed password. `mustChangePassword` marks an administrator-issued
 * temporary password. Throws RecordError "conflict" when the email is taken.
 */
export function createUser(db: Db, input: { email: string; name: string; role: Role; password: string; mustChangePassword?: boolean }): UserRow {
  const email = normaliseEmail(input.email);
  if (getUserByEmail(db, email)) {
    throw new RecordError("conflict", `A user with the email ${email} already exists.`, "email");
  }
  const passwordHash = bcrypt.hashSync(input.password, BCRYPT_ROUNDS);
  const u = db
    .insert(users)
    .values({ email, name: input.name.trim(), role: input.role, passwordHash, mustChangePassword: input.mustChangePassword ?? false })
    .returning()
    .get();
  return toRow(u);
}

function requireUser(db: Db, id: number): UserRow {
  const u = getUserById(db, id);
  if (!u) throw new RecordError("not-found", `No user with id ${id}.`, "userId");
  return u;
}

/** Changes a user's role; returns the user before and after. */
export function setUserRole(db: Db, id: number, role: Role): { before: UserRow; after: UserRow } {
  const before = requireUser(db, id);
  db.update(users).set({ role }).where(eq(users.id, id)).run();
  return { before, after: { ...before, role } };
}

/** Activates or deactivates a user (never deletes); returns the user before and after. */
export function setUserActive(db: Db, id: number, active: boolean): { before: UserRow; after: UserRow } {
  const before = requireUser(db, id);
  db.update(users).set({ active }).where(eq(users.id, id)).run();
  return { before, after: { ...before, active } };
}

/**
 * Sets a new password (bcrypt-hashed). `temporary`: issued by an administrator, to be changed at
 * the next sign-in; otherwise the user chose it and the must-change mark is cleared.
 */
export function setUserPassword(db: Db, id: number, password: string, options: { temporary?: boolean } = {}): void {
  requireUser(db, id);
  db.update(users)
    .set({ passwordHash: bcrypt.hashSync(password, BCRYPT_ROUNDS), mustChangePassword: options.temporary ?? false })
    .where(eq(users.id, id))
    .run();
}

/** True when `password` is the user's current password (one bcrypt comparison). */
export async function checkPassword(db: Db, id: number, password: string): Promise<boolean> {
  const u = db.select({ hash: users.passwordHash }).from(users).where(eq(users.id, id)).get();
  return bcrypt.compare(password, u?.hash ?? standInHash());
}
