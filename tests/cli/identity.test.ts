/**
 * One identity for both doors: the command line resolves who acts to a user (--as, else
 * TRACEWRIGHT_USER, else the OS login mapped to a user by e-mail) and records the user's id and
 * name, as the control room does; commands that change who may do what refuse without an
 * administrator (except while none exists, to add the first).
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { execa } from "execa";
import { afterAll, afterEach, beforeAll, describe, expect, it, vi } from "vitest";
import { closeDb, getDb } from "../../db/client";
import { createUser, setUserActive, getUserByEmail } from "../../db/queries/users";
import { resolveActor } from "../../cli/shared";
import { AppError } from "../../pipeline/errors";
import { catchError } from "../helpers/catch-error";

let tmp: string;
const MANAGE = { doing: "manage users", roles: ["admin"] as const, requiresUser: true };
const savedUser = process.env.TRACEWRIGHT_USER;

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-identity-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
});
afterEach(() => {
  if (savedUser === undefined) delete process.env.TRACEWRIGHT_USER;
  else process.env.TRACEWRIGHT_USER = savedUser;
  vi.restoreAllMocks();
});
afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("resolveActor", () => {
  it("lets anyone add the first administrator, then requires one", () => {
    const db = getDb();
    delete process.env.TRACEWRIGHT_USER;
    expect(resolveActor(db, "not-an-email", "cli", MANAGE)).toEqual({ userId: null, label: "not-an-email", door: "cli" });
    createUser(db, { email: "mhale@example.org", name: "Morgan Hale", role: "admin", password: "long-enough-1" });
    createUser(db, { email: "tpike@example.org", name: "Tam Pike", role: "processor", password: "long-enough-1" });
    const refused = catchError<AppError>(() => resolveActor(db, "not-an-email", "cli", MANAGE));
    expect(refused).toBeInstanceOf(AppError);
    expect(refused.message).toMatch(/--as not-an-email: no such user, so nobody may manage users/);
    expect(catchError<AppError>(() => resolveActor(db, "tpike@example.org", "cli", MANAGE)).message).toMatch(/processor role may not manage users/);
  });

  it("records the user's id and name whichever way the user is named", () => {
    const db = getDb();
    const hale = getUserByEmail(db, "mhale@example.org")!;
    const expected = { userId: hale.id, label: "Morgan Hale", door: "cli" };
    expect(resolveActor(db, "mhale@example.org")).toEqual(expected);
    expect(resolveActor(db, "MHale")).toEqual(expected);
    process.env.TRACEWRIGHT_USER = "mhale@example.org";
    expect(resolveActor(db, undefined, "cli", MANAGE)).toEqual(expected);
    delete process.env.TRACEWRIGHT_USER;
    vi.spyOn(os, "userInfo").mockReturnValue({ username: "mhale" } as ReturnType<typeof os.userInfo>);
    expect(resolveActor(db, undefined, "cli", MANAGE)).toEqual(expected);
  });

  it("an OS login that is nobody may start runs (no user id) but not manage users", () => {
    const db = getDb();
    delete process.env.TRACEWRIGHT_USER;
    vi.spyOn(os, "userInfo").mockReturnValue({ username: "fieldlaptop" } as ReturnType<typeof os.userInfo>);
    expect(resolveActor(db, undefined)).toEqual({ userId: null, label: "fieldlaptop", door: "cli" });
    expect(catchError<AppError>(() => resolveActor(db, undefined, "cli", MANAGE)).message).toMatch(/^the OS user fieldlaptop: no such user/);
    // A name given on purpose must be a user.
    expect(catchError<AppError>(() => resolveActor(db, "somebody")).message).toMatch(/^--as somebody: no such user/);
  });

  it("refuses a deactivated user", () => {
    const db = getDb();
    const pike = getUserByEmail(db, "tpike@example.org")!;
    setUserActive(db, pike.id, false);
    expect(catchError<AppError>(() => resolveActor(db, "tpike")).message).toMatch(/tpike@example\.org is deactivated/);
    setUserActive(db, pike.id, true);
  });
});

describe("the command line", () => {
  it("users add --role admin --as not-an-email is refused once an administrator exists, and adds nobody", async () => {
    const bin = path.join(process.cwd(), "bin", "tracewright.mjs");
    const data = path.join(tmp, "cli-data");
    const tw = (args: string[]) => execa(process.execPath, [bin, ...args], { env: { ...process.env, TRACEWRIGHT_DATA_DIR: data, TRACEWRIGHT_USER: "" }, reject: false, cwd: tmp });
    const first = await tw(["users", "add", "--email", "root@example.org", "--name", "Rae Root", "--role", "admin", "--password", "long-enough-1"]);
    expect(first.exitCode, first.stderr).toBe(0);
    const r = await tw(["users", "add", "--email", "eve@example.org", "--name", "Eve", "--role", "admin", "--password", "long-enough-1", "--as", "not-an-email"]);
    expect(r.exitCode).toBe(2);
    expect(r.stderr).toMatch(/--as not-an-email: no such user/);
    const ok = await tw(["users", "add", "--email", "eve@example.org", "--name", "Eve Ok", "--role", "lead", "--password", "long-enough-1", "--as", "root"]);
    expect(ok.exitCode, ok.stderr).toBe(0);
    const list = JSON.parse((await tw(["users", "list", "--json"])).stdout) as Array<{ email: string; role: string }>;
    expect(list.map((u) => `${u.email}:${u.role}`).sort()).toEqual(["eve@example.org:lead", "root@example.org:admin"]);
  });
});
