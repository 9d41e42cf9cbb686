/**
 * Server actions of the People page: the same permission check as the route handlers, field
 * errors for bad input, invitations mailed through a local SMTP catcher (smtp-server) or, without
 * mail, the temporary password handed to the administrator; nobody can be deleted.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import type { AddressInfo } from "node:net";
import { SMTPServer } from "smtp-server";
import { readable } from "../helpers/mail-catcher";
import { afterAll, beforeAll, describe, expect, it, vi } from "vitest";
import { cookieStore, signInAs, signOut } from "./session-cookie";

vi.mock("next/headers", () => ({ cookies: async () => cookieStore, headers: async () => new Headers() }));
vi.mock("next/cache", () => ({ revalidatePath: vi.fn() }));

import { closeDb, getDb } from "@/db/client";
import { DEMO_ACCOUNTS, seedDemoUsers } from "@/db/seed";
import { getUserByEmail, listUsers, verifyCredentials } from "@/db/queries/users";
import { listAudit } from "@/db/queries/audit";
import { addUser, changeActive, changeRole } from "@/app/lib/actions/users";

let tmp: string;
const users: Record<string, { id: number; role: "admin" | "lead" | "processor" | "auditor"; name: string; email: string }> = {};

function form(fields: Record<string, string>): FormData {
  const f = new FormData();
  for (const [k, v] of Object.entries(fields)) f.set(k, v);
  return f;
}

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-actions-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  delete process.env.TRACEWRIGHT_SMTP_HOST;
  process.env.NEXTAUTH_SECRET = "user-action-test-secret-0123456789abcdef";
  const db = getDb();
  for (const a of seedDemoUsers(db)) {
    const u = getUserByEmail(db, a.email)!;
    users[a.role] = { id: u.id, role: u.role, name: u.name, email: u.email };
  }
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("people actions", () => {
  it("seeding twice keeps one account per role", () => {
    seedDemoUsers(getDb());
    // Our own contract (db/seed.ts): accounts matched by email, never created twice.
    const demoEmails = new Set(DEMO_ACCOUNTS.map((a) => a.email));
    const rows = listUsers(getDb()).filter((u) => demoEmails.has(u.email));
    expect(rows.map((u) => [u.role, u.id]).sort()).toEqual(
      (["admin", "auditor", "lead", "processor"] as const).map((role) => [role, users[role].id]),
    );
    expect(getUserByEmail(getDb(), users.lead.email)?.name).toBe("Rosa Okafor-Lind");
  });

  it("refuses a lead: only administrators manage users", async () => {
    await signInAs(users.lead);
    const state = await addUser({}, form({ name: "Some One", email: "some.one@corvell.example", role: "processor", password: "" }));
    expect(state.error).toBe("The lead role may not manage users.");
    expect(getUserByEmail(getDb(), "some.one@corvell.example")).toBeNull();
  });

  it("refuses when nobody is signed in", async () => {
    signOut();
    const state = await changeRole({}, form({ userId: String(users.auditor.id), role: "admin" }));
    expect(state.error).toMatch(/Sign in/);
  });

  it("gives field errors for a bad email and a short password", async () => {
    await signInAs(users.admin);
    const state = await addUser({}, form({ name: "Kit Ferrand", email: "kit-at-corvell", role: "processor", password: "short" }));
    expect(state.fields?.email).toMatch(/email address/);
    expect(state.fields?.password).toMatch(/10 characters/);
  });

  it("without a mail server, an invitation shows the temporary password, which signs in", async () => {
    await signInAs(users.admin);
    const state = await addUser({}, form({ name: "Kit Ferrand", email: "kit.ferrand@corvell.example", role: "auditor", password: "" }));
    expect(state.temporaryPassword).toBeTruthy();
    expect(state.ok).toMatch(/could not be mailed/);
    const user = await verifyCredentials(getDb(), "kit.ferrand@corvell.example", state.temporaryPassword!);
    expect(user?.role).toBe("auditor");
    expect(listAudit(getDb(), { action: "user.invite" })[0].actorLabel).toBe(users.admin.name);
  });

  it("mails the invitation, with a link to choose a password, when SMTP is set up", async () => {
    const received: Array<{ to: string[]; text: string }> = [];
    const smtp = new SMTPServer({
      authOptional: true,
      disabledCommands: ["STARTTLS"],
      logger: false,
      onData(stream, session, cb) {
        let text = "";
        stream.on("data", (c: Buffer) => (text += c.toString("utf8")));
        stream.on("end", () => {
          received.push({ to: session.envelope.rcptTo.map((r) => r.address), text });
          cb();
        });
      },
    });
    await new Promise<void>((r) => smtp.listen(0, "127.0.0.1", () => r()));
    process.env.TRACEWRIGHT_SMTP_HOST = "127.0.0.1";
    process.env.TRACEWRIGHT_SMTP_PORT = String((smtp.server.address() as AddressInfo).port);
    try {
      await signInAs(users.admin);
      const state = await addUser({}, form({ name: "Ola Brent", email: "ola.brent@corvell.example", role: "processor", password: "" }));
      expect(state.ok).toMatch(/mailed/);
      expect(state.temporaryPassword).toBeUndefined();
      expect(received).toHaveLength(1);
      expect(received[0].to).toEqual(["ola.brent@corvell.example"]);
      expect(readable(received[0].text)).toMatch(/\/set-password\?token=[A-Za-z0-9_-]{43}/);
      expect(readable(received[0].text)).not.toMatch(/temporary password/);
    } finally {
      delete process.env.TRACEWRIGHT_SMTP_HOST;
      delete process.env.TRACEWRIGHT_SMTP_PORT;
      await new Promise<void>((r) => smtp.close(() => r()));
    }
  });

  it("refuses a second account with the same email", async () => {
    await signInAs(users.admin);
    const state = await addUser({}, form({ name: "Rosa Again", email: "ROSA.okafor-lind@corvell.example", role: "lead", password: "long-enough-password" }));
    expect(state.error).toMatch(/already exists/);
  });

  it("deactivates (never deletes): the user cannot sign in, keeps the name, and can come back", async () => {
    await signInAs(users.admin);
    const off = await changeActive({}, form({ userId: String(users.processor.id), active: "false" }));
    expect(off.ok).toMatch(/deactivated/);
    expect(await verifyCredentials(getDb(), users.processor.email, "demo-processor-quillmoor")).toBeNull();
    expect(getUserByEmail(getDb(), users.processor.email)?.name).toBe("Tam Whitcombe");
    await changeActive({}, form({ userId: String(users.processor.id), active: "true" }));
    expect(await verifyCredentials(getDb(), users.processor.email, "demo-processor-quillmoor")).not.toBeNull();
  });

  it("an administrator cannot deactivate themself or change their own role", async () => {
    await signInAs(users.admin);
    expect((await changeActive({}, form({ userId: String(users.admin.id), active: "false" }))).error).toMatch(/your own account/);
    expect((await changeRole({}, form({ userId: String(users.admin.id), role: "auditor" }))).error).toMatch(/your own role/);
  });

  it("changes a role and records before and after", async () => {
    await signInAs(users.admin);
    const state = await changeRole({}, form({ userId: String(users.auditor.id), role: "lead" }));
    expect(state.ok).toMatch(/now lead/);
    const e = listAudit(getDb(), { action: "user.role" })[0];
    expect(JSON.parse(e.beforeJson!)).toEqual({ role: "auditor" });
    expect(JSON.parse(e.afterJson!)).toEqual({ role: "lead" });
  });
});
