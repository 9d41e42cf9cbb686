/** `tracewright users`: add, list, change role, deactivate (so an admin exists without the web). */
import type { Command } from "commander";
import { z } from "zod";
import { recordAudit } from "../../db/queries/audit";
import { createUser, getUserByEmail, listUsers, setUserActive, setUserRole } from "../../db/queries/users";
import { ROLES } from "../../db/schema";
import { AppError } from "../../pipeline/errors";
import { writeTransaction } from "../../db/client";
import { action, openCliDb, printJson, resolveActor } from "../shared";

/** Changing who may do what needs an administrator (the first one may be added by anyone while none exists). */
const MANAGE = { doing: "manage users", roles: ["admin"] as const, requiresUser: true };

const addSchema = z.object({
  email: z.email("an e-mail address"),
  name: z.string().min(1, "a name"),
  role: z.enum(ROLES, `one of ${ROLES.join(", ")}`),
  password: z.string().min(8, "a password of at least 8 characters"),
});

function zodToAppError(err: z.ZodError): AppError {
  const i = err.issues[0];
  return new AppError("bad-input", `--${String(i.path[0])}: expected ${i.message}`, { field: `--${String(i.path[0])}`, expected: i.message });
}

export function registerUsers(program: Command): void {
  const users = program.command("users").description("manage the people who can sign in to the control room");
  users
    .command("add")
    .description("add a user")
    .requiredOption("--email <email>", "sign-in e-mail")
    .requiredOption("--name <name>", "full name")
    .requiredOption("--role <role>", `one of ${ROLES.join(", ")}`)
    .option("--password <password>", "initial password (default: TRACEWRIGHT_NEW_PASSWORD)")
    .option("--as <email>", "the administrator adding (default: TRACEWRIGHT_USER, else the OS user)")
    .action(
      action(async (opts: { email: string; name: string; role: string; password?: string; as?: string }) => {
        const parsed = addSchema.safeParse({ ...opts, password: opts.password ?? process.env.TRACEWRIGHT_NEW_PASSWORD });
        if (!parsed.success) throw zodToAppError(parsed.error);
        const db = openCliDb();
        // Who acts is settled before anything changes, and the change and its audit record
        // are one transaction: no user without its audit event.
        const actor = resolveActor(db, opts.as, "cli", MANAGE);
        if (getUserByEmail(db, parsed.data.email)) throw new AppError("conflict", `A user with e-mail ${parsed.data.email} exists already`);
        const user = writeTransaction(db, (tx) => {
          const created = createUser(tx, parsed.data);
          recordAudit(tx, {
            actor,
            action: "user.add",
            entityType: "user",
            entityId: created.id,
            after: { email: created.email, name: created.name, role: created.role },
          });
          return created;
        });
        process.stdout.write(`added ${user.email} (${user.role})\n`);
      }),
    );
  users
    .command("list")
    .description("list users")
    .option("--json", "print JSON with stable keys")
    .action(
      action(async (opts: { json?: boolean }) => {
        const db = openCliDb();
        const rows = listUsers(db);
        if (opts.json) {
          printJson(rows.map((u) => ({ id: u.id, email: u.email, name: u.name, role: u.role, active: u.active })));
          return;
        }
        for (const u of rows) process.stdout.write(`${u.email.padEnd(36)} ${u.role.padEnd(10)} ${u.active ? "active     " : "deactivated"} ${u.name}\n`);
      }),
    );
  users
    .command("set-role")
    .description("change a user's role")
    .argument("<email>")
    .argument("<role>", `one of ${ROLES.join(", ")}`)
    .option("--as <email>", "the administrator changing it (default: TRACEWRIGHT_USER, else the OS user)")
    .action(
      action(async (email: string, role: string, opts: { as?: string }) => {
        const r = z.enum(ROLES).safeParse(role);
        if (!r.success) throw new AppError("bad-input", `role "${role}": expected one of ${ROLES.join(", ")}`, { choices: [...ROLES] });
        const db = openCliDb();
        const actor = resolveActor(db, opts.as, "cli", MANAGE);
        const user = getUserByEmail(db, email);
        if (!user) throw new AppError("not-found", `No user with e-mail ${email}`);
        writeTransaction(db, (tx) => {
          const { before, after } = setUserRole(tx, user.id, r.data);
          recordAudit(tx, { actor, action: "user.role", entityType: "user", entityId: user.id, before: { role: before.role }, after: { role: after.role } });
        });
        process.stdout.write(`${email} is now ${r.data}\n`);
      }),
    );
  users
    .command("deactivate")
    .description("stop a user signing in (users are never deleted: the audit trail keeps their name)")
    .argument("<email>")
    .option("--as <email>", "the administrator deactivating (default: TRACEWRIGHT_USER, else the OS user)")
    .action(
      action(async (email: string, opts: { as?: string }) => {
        const db = openCliDb();
        const actor = resolveActor(db, opts.as, "cli", MANAGE);
        const user = getUserByEmail(db, email);
        if (!user) throw new AppError("not-found", `No user with e-mail ${email}`);
        writeTransaction(db, (tx) => {
          setUserActive(tx, user.id, false);
          recordAudit(tx, { actor, action: "user.deactivate", entityType: "user", entityId: user.id, before: { active: true }, after: { active: false } });
        });
        process.stdout.write(`${email} deactivated\n`);
      }),
    );
}
