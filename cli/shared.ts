/** What every command shares: opening the database, naming the actor, printing errors. */
import { getDb, type Db } from "../db/client";
import os from "node:os";
import { findUserByLoginName, hasActiveAdmin } from "../db/queries/users";
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

/** The OS login name of whoever runs the command. */
export function osUserName(): string {
  try {
    return os.userInfo().username;
  } catch {
    return process.env.USER ?? "cli";
  }
}

/** What a command needs of the person acting. */
export interface ActorRule {
  /** The action, for messages ("start runs", "manage users"). */
  doing: string;
  /** Roles allowed. @default every role but auditor */
  roles?: readonly Role[];
  /**
   * True for commands that change who may do what (users add/set-role/deactivate): they need a
   * user holding one of `roles`; only while no active administrator exists may anyone at the
   * machine act (to add the first one).
   */
  requiresUser?: boolean;
}

/**
 * The person acting, resolved to a user: `--as`, else TRACEWRIGHT_USER, else the OS login
 * name, each an e-mail or the part of an e-mail before "@" (see findUserByLoginName). The
 * actor carries the user's id and name, the same as the control room records.
 *
 * A name given with --as or TRACEWRIGHT_USER must be a user. An OS login that matches no user
 * may still start runs, recorded with no user id and the login as label; it may not manage users
 * (unless no administrator exists yet). Deactivated users and roles outside `rule.roles` are refused.
 */
export function resolveActor(db: Db, as: string | undefined, door: Door = "cli", rule: ActorRule = { doing: "start runs" }): Actor {
  const source = as !== undefined ? "--as" : process.env.TRACEWRIGHT_USER ? "TRACEWRIGHT_USER" : "the OS user";
  const who = as ?? (process.env.TRACEWRIGHT_USER || osUserName());
  const named = `${source} ${who}`;
  const user = findUserByLoginName(db, who);
  if (!user) {
    const bootstrap = rule.requiresUser && !hasActiveAdmin(db);
    if (bootstrap) return { userId: null, label: who, door };
    if (source !== "the OS user" || rule.requiresUser) {
      throw new AppError(
        rule.requiresUser ? "forbidden" : "bad-input",
        `${named}: no such user, so nobody may ${rule.doing} here under that name (give the e-mail of a user with --as or TRACEWRIGHT_USER; see tracewright users list)`,
        { field: "--as" },
      );
    }
    return { userId: null, label: who, door };
  }
  if (!user.active) throw new AppError("forbidden", `${named}: ${user.email} is deactivated`, { field: "--as" });
  const allowed = rule.roles ?? ROLES.filter((r) => r !== "auditor");
  if (!allowed.includes(user.role)) {
    throw new AppError("forbidden", `${named}: a user with the ${user.role} role may not ${rule.doing}`, { field: "--as" });
  }
  return { userId: user.id, label: user.name, door };
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
