/**
 * An administrator-issued temporary password (an invitation without mail) must be changed at the
 * first sign-in: until then every permission check refuses and every control-room page sends the
 * person to /change-password; the change needs the current password, is audited, and clears the mark.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it, vi } from "vitest";
import { cookieStore, signInAs } from "./session-cookie";

vi.mock("next/headers", () => ({ cookies: async () => cookieStore, headers: async () => new Headers() }));
vi.mock("next/cache", () => ({ revalidatePath: vi.fn() }));

import { closeDb, getDb } from "@/db/client";
import { seedDemoUsers } from "@/db/seed";
import { getUserByEmail, verifyCredentials } from "@/db/queries/users";
import { listAudit } from "@/db/queries/audit";
import { addUser } from "@/app/lib/actions/users";
import { changeOwnPassword } from "@/app/lib/actions/password";
import { pageUser } from "@/app/lib/page-user";
import { requirePermission } from "@/app/lib/session";

let tmp: string;
const form = (f: Record<string, string>) => {
  const d = new FormData();
  for (const [k, v] of Object.entries(f)) d.set(k, v);
  return d;
};

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-temp-pw-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  delete process.env.TRACEWRIGHT_SMTP_HOST;
  process.env.NEXTAUTH_SECRET = "temporary-password-test-secret-0123456789abcdef";
  seedDemoUsers(getDb());
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("temporary password", () => {
  it("is marked, blocks everything but the change, and is replaced by the person's own", async () => {
    const db = getDb();
    const admin = getUserByEmail(db, seedDemoUsers(db).find((a) => a.role === "admin")!.email)!;
    await signInAs(admin);
    const invited = await addUser({}, form({ name: "Wren Calder", email: "wren@example.org", role: "processor", password: "" }));
    const temporary = invited.temporaryPassword!;
    expect(temporary).toBeTruthy();
    const wren = getUserByEmail(db, "wren@example.org")!;
    expect(wren.mustChangePassword).toBe(true);

    await signInAs(wren);
    await expect(requirePermission("runs.read")).rejects.toMatchObject({ code: "forbidden", message: expect.stringMatching(/change-password/) });
    // next/navigation's redirect throws an error whose digest names the target.
    const err = await pageUser().catch((e: { digest?: string }) => e);
    expect(String((err as { digest?: string }).digest)).toContain("/change-password");

    expect((await changeOwnPassword({}, form({ current: "not it", next: "wren-own-password", repeat: "wren-own-password" }))).fields).toHaveProperty("current");
    expect((await changeOwnPassword({}, form({ current: temporary, next: "wren-own-password", repeat: "wren-own-passwort" }))).fields).toHaveProperty("repeat");
    expect((await changeOwnPassword({}, form({ current: temporary, next: temporary, repeat: temporary }))).fields).toHaveProperty("next");
    const done = await changeOwnPassword({}, form({ current: temporary, next: "wren-own-password", repeat: "wren-own-password" }));
    expect(done.ok).toBeTruthy();

    expect(getUserByEmail(db, "wren@example.org")!.mustChangePassword).toBe(false);
    expect(await verifyCredentials(db, "wren@example.org", temporary)).toBeNull();
    expect(await verifyCredentials(db, "wren@example.org", "wren-own-password")).not.toBeNull();
    await expect(requirePermission("runs.read")).resolves.toMatchObject({ id: wren.id });
    const events = listAudit(db, { action: "user.password" });
    expect(events[0]).toMatchObject({ actorUserId: wren.id, entityId: String(wren.id) });
    expect(events[0].afterJson).not.toContain("wren-own-password");
  });

  it("a password chosen by the administrator is not marked temporary", async () => {
    const db = getDb();
    const admin = getUserByEmail(db, seedDemoUsers(db).find((a) => a.role === "admin")!.email)!;
    await signInAs(admin);
    await addUser({}, form({ name: "Ivo Brandt", email: "ivo@example.org", role: "lead", password: "chosen-by-admin-1" }));
    expect(getUserByEmail(db, "ivo@example.org")!.mustChangePassword).toBe(false);
  });
});
