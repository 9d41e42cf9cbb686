/**
 * Password links through the control room's actions, with mail going to a real SMTP server
 * (smtp-server): a forgotten password is reset by a mailed link that works once; the answer does
 * not tell whether an address has an account; an invitation with a mail server set up carries a
 * link instead of a temporary password (the temporary-password fallback without one is checked in
 * temporary-password.test.ts).
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it, vi } from "vitest";
import { cookieStore, signInAs } from "./session-cookie";
import { readable, startCatcher, waitForMail } from "../helpers/mail-catcher";

vi.mock("next/headers", () => ({ cookies: async () => cookieStore, headers: async () => new Headers() }));
vi.mock("next/cache", () => ({ revalidatePath: vi.fn() }));

import { closeDb, getDb } from "@/db/client";
import { seedDemoUsers } from "@/db/seed";
import { getUserByEmail, verifyCredentials } from "@/db/queries/users";
import { listAudit } from "@/db/queries/audit";
import { addUser } from "@/app/lib/actions/users";
import { requestPasswordReset, setPasswordWithLink } from "@/app/lib/actions/account";

let tmp: string;
let catcher: Awaited<ReturnType<typeof startCatcher>>;
const form = (f: Record<string, string>) => {
  const d = new FormData();
  for (const [k, v] of Object.entries(f)) d.set(k, v);
  return d;
};
const linkIn = (raw: string) => {
  const m = /http:\/\/tw\.example:4000\/set-password\?token=([A-Za-z0-9_-]+)/.exec(readable(raw));
  if (!m) throw new Error(`no link in the mail:\n${raw}`);
  return m[1];
};

beforeAll(async () => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-links-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  process.env.NEXTAUTH_SECRET = "password-links-test-secret-0123456789abcdef";
  process.env.TRACEWRIGHT_PUBLIC_URL = "http://tw.example:4000";
  catcher = await startCatcher();
  process.env.TRACEWRIGHT_SMTP_HOST = "127.0.0.1";
  process.env.TRACEWRIGHT_SMTP_PORT = String(catcher.port);
  seedDemoUsers(getDb());
});

afterAll(async () => {
  closeDb();
  delete process.env.TRACEWRIGHT_SMTP_HOST;
  delete process.env.TRACEWRIGHT_SMTP_PORT;
  delete process.env.TRACEWRIGHT_PUBLIC_URL;
  await catcher.close();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("password reset by mailed link", () => {
  it("mails a link that sets a new password once", async () => {
    const tam = "tam.whitcombe@corvell.example";
    const asked = await requestPasswordReset({}, form({ email: tam.toUpperCase() }));
    expect(asked.ok).toMatch(/If TAM.WHITCOMBE@CORVELL.EXAMPLE has an account/);
    const mail = await waitForMail(catcher.messages, (m) => m.to.includes(tam));
    expect(readable(mail.raw)).toMatch(/^Subject: Reset your Tracewright password/m);
    const token = linkIn(mail.raw);

    const short = await setPasswordWithLink({}, form({ token, next: "short", repeat: "short" }));
    expect(short.fields).toHaveProperty("next");
    const done = await setPasswordWithLink({}, form({ token, next: "tam-new-password-2026", repeat: "tam-new-password-2026" }));
    expect(done.ok).toMatch(/Your password is set/);
    expect(await verifyCredentials(getDb(), tam, "tam-new-password-2026")).not.toBeNull();
    expect(await verifyCredentials(getDb(), tam, "demo-processor-quillmoor")).toBeNull();

    const again = await setPasswordWithLink({}, form({ token, next: "tam-other-password-1", repeat: "tam-other-password-1" }));
    expect(again.fields?.token).toMatch(/used already/);
    expect(await verifyCredentials(getDb(), tam, "tam-other-password-1")).toBeNull();
    const actions = listAudit(getDb(), {}).map((e) => e.action);
    expect(actions).toContain("user.password-reset-request");
    expect(actions).toContain("user.password-reset");
  });

  it("answers an unknown address in the same words, and mails nothing", async () => {
    const before = catcher.messages.length;
    const asked = await requestPasswordReset({}, form({ email: "nobody@corvell.example" }));
    expect(asked.ok).toBe("If nobody@corvell.example has an account here, a link to choose a new password is on its way. It works once, within an hour.");
    await new Promise((r) => setTimeout(r, 300));
    expect(catcher.messages.length).toBe(before);
    expect((await requestPasswordReset({}, form({ email: "not an address" }))).fields).toHaveProperty("email");
  });
});

describe("invitation by mailed link", () => {
  it("mails a link, never a temporary password, and the link lets the person choose one", async () => {
    const db = getDb();
    await signInAs(getUserByEmail(db, "ines.varga@corvell.example")!);
    const invited = await addUser({}, form({ name: "Piet Anand", email: "piet@corvell.example", role: "processor", password: "" }));
    expect(invited.ok).toMatch(/mailed to piet@corvell.example with a link/);
    expect(invited.temporaryPassword).toBeUndefined();
    const mail = await waitForMail(catcher.messages, (m) => m.to.includes("piet@corvell.example"));
    expect(readable(mail.raw)).not.toMatch(/temporary password/i);
    const token = linkIn(mail.raw);
    const done = await setPasswordWithLink({}, form({ token, next: "piet-chose-this-1", repeat: "piet-chose-this-1" }));
    expect(done.ok).toBeTruthy();
    const piet = getUserByEmail(db, "piet@corvell.example")!;
    expect(piet.mustChangePassword).toBe(false);
    expect(await verifyCredentials(db, "piet@corvell.example", "piet-chose-this-1")).not.toBeNull();
    expect(listAudit(db, { action: "user.password-invitation" })[0]).toMatchObject({ entityId: String(piet.id) });
  });
});
