/** What every command shares: opening the database, naming the actor, printing errors. */
import { getDb, type Db } from "../db/client";
import { getUserByEmail } from "../db/queries/users";
import type { Actor } from "../db/queries/audit";
import { AppError, toAppError } from "../pipeline/errors";
import { cleanTemporaryArtifacts } from "../pipeline/artifact-store";
import { markInterruptedRuns } from "../pipeline/run-lease";
import { ROLES, type Door, type Role } from "../db/schema";

/**
 * Opens the database (migrating it), marks runs left by dead processes as interrupted and
 * deletes the temporary artifact files they left.
 */
export function openCliDb(): Db {
  const db = getDb();
  const marked = markInterruptedRuns(db);
  try {
    cleanTemporaryArtifacts();
  } catch {
    // a read-only command must work even when the artifact folder cannot be cleaned
  }
  if (marked.length > 0) {
    process.stderr.write(
      `Marked ${marked.length === 1 ? "run" : "runs"} ${marked.join(", ")} as interrupted (the process running ${marked.length === 1 ? "it" : "them"} stopped). Resume with: tracewright resume <run>\n`,
    );
  }
  return db;
}

/**
 * The person acting: --as <email> (or TRACEWRIGHT_USER) when it names a user, else the OS user.
 * `doing` names the action for messages; `roles` limits which roles may do it (default: anyone
 * but an auditor, who reads and changes nothing).
 */
export function resolveActor(
  db: Db,
  as: string | undefined,
  door: Door = "cli",
  rule: { doing: string; roles?: readonly Role[] } = { doing: "start runs" },
): Actor {
  const who = as ?? process.env.TRACEWRIGHT_USER;
  if (who && who.includes("@")) {
    const user = getUserByEmail(db, who);
    if (!user) throw new AppError("bad-input", `--as ${who}: no such user (see tracewright users list)`, { field: "--as" });
    if (!user.active) throw new AppError("forbidden", `--as ${who}: this user is deactivated`, { field: "--as" });
    const allowed = rule.roles ?? ROLES.filter((r) => r !== "auditor");
    if (!allowed.includes(user.role)) {
      throw new AppError("forbidden", `--as ${who}: a user with the ${user.role} role may not ${rule.doing}`, { field: "--as" });
    }
    return { userId: user.id, label: user.email, door };
  }
  return { userId: null, label: who ?? process.env.USER ?? "cli", door };
}

/** Prints an error as a person-readable message and sets the exit code. Never a stack trace. */
export function reportError(err: unknown): void {
  const e = toAppError(err);
  // With --json, scripts get the error as JSON on stdout too (and the message on stderr as always).
  if (process.argv.includes("--json")) printJson({ error: { code: e.code, message: e.message, ...e.details } });
  process.stderr.write(`tracewright: ${e.message}\n`);
  if (e.details.expected && !e.message.includes(e.details.expected)) process.stderr.write(`  expected: ${e.details.expected}\n`);
  if (e.code === "internal" && process.env.TRACEWRIGHT_DEBUG) process.stderr.write(`${(err as Error)?.stack}\n`);
  process.exitCode = e.exitCode;
}

/** Wraps a command action so every error goes through reportError. */
export function action<A extends unknown[]>(fn: (...args: A) => Promise<void> | void): (...args: A) => Promise<void> {
  return async (...args: A) => {
    try {
      await fn(...args);
    } catch (err) {
      reportError(err);
    }
  };
}

/** Prints JSON with stable keys for scripts. */
export function printJson(value: unknown): void {
  process.stdout.write(`${JSON.stringify(value, null, 2)}\n`);
}

/** Parses a positive integer argument or throws a bad-input error naming it. */
export function parseId(value: string, what: string): number {
  const n = Number(value);
  if (!Number.isInteger(n) || n <= 0) throw new AppError("bad-input", `${what} must be a positive whole number, got "${value}"`, { field: what });
  return n;
}

export function formatDuration(ms: number | null | undefined): string {
  if (ms === null || ms === undefined) return "-";
  if (ms < 1000) return `${ms} ms`;
  if (ms < 60_000) return `${(ms / 1000).toFixed(1)} s`;
  return `${Math.floor(ms / 60_000)} min ${Math.round((ms % 60_000) / 1000)} s`;
}
