"use server";

/**
 * Server actions of the People page: add or invite users, change roles, deactivate and
 * reactivate. Users are never deleted. Each action checks "users.manage" itself and records
 * an audit event.
 */
import crypto from "node:crypto";
import { revalidatePath } from "next/cache";
import { z } from "zod";
import { getDb } from "@/db/client";
import { recordAudit } from "@/db/queries/audit";
import { createUser, setUserActive, setUserRole } from "@/db/queries/users";
import { ROLES } from "@/db/schema";
import { AppError } from "@/pipeline/errors";
import { controlRoomOrigin } from "@/db/queries/notices";
import { issuePasswordToken } from "@/db/queries/password-tokens";
import { sendInvitation, sendInvitationLink, smtpSettings } from "../mail";
import { requirePermission, webActor } from "../session";
import { errorState, type FormState } from "./form-state";

const addUserSchema = z.object({
  name: z.string().trim().min(2, "Give the person's name (2 characters or more).").max(120),
  email: z.string().trim().email("Enter an email address like name@example.org."),
  role: z.enum(ROLES, { message: `Choose one of: ${ROLES.join(", ")}.` }),
  /** Empty: invite with a generated temporary password. */
  password: z.union([z.literal(""), z.string().min(10, "Passwords need 10 characters or more.").max(200)]),
});

/** Adds a user with a chosen password, or invites them: a mailed link to choose a password, else a temporary password. */
export async function addUser(_prev: FormState, form: FormData): Promise<FormState> {
  try {
    const admin = await requirePermission("users.manage");
    const input = addUserSchema.parse({
      name: form.get("name") ?? "",
      email: form.get("email") ?? "",
      role: form.get("role") ?? "",
      password: form.get("password") ?? "",
    });
    const invite = input.password === "";
    const password = invite ? crypto.randomBytes(9).toString("base64url") : input.password;
    const db = getDb();
    // An invitation's generated password is temporary: it must be changed at the first sign-in.
    const user = createUser(db, { name: input.name, email: input.email, role: input.role, password, mustChangePassword: invite });
    recordAudit(db, {
      actor: webActor(admin),
      action: invite ? "user.invite" : "user.add",
      entityType: "user",
      entityId: user.id,
      after: { name: user.name, email: user.email, role: user.role },
    });
    revalidatePath("/people");
    if (!invite) return { ok: `${user.name} can now sign in as ${user.role}.` };
    // With a mail server the invitation carries a link to choose a password (once, within seven
    // days); the generated password is then never shown. Without one, or when the mail fails, the
    // administrator passes the temporary password on.
    if (smtpSettings()) {
      const link = issuePasswordToken(db, user.id, "invitation");
      const linkMail = await sendInvitationLink({
        to: user.email,
        name: user.name,
        role: user.role,
        link: `${controlRoomOrigin()}/set-password?token=${link.token}`,
        expiresAt: link.expiresAt,
        invitedBy: admin.name,
      });
      if (linkMail.sent) return { ok: `Invitation mailed to ${user.email} with a link to choose a password.` };
    }
    const mail = await sendInvitation({
      to: user.email,
      name: user.name,
      role: user.role,
      temporaryPassword: password,
      signInUrl: `${controlRoomOrigin()}/sign-in`,
      invitedBy: admin.name,
    });
    if (mail.sent) return { ok: `Invitation mailed to ${user.email}.` };
    return {
      ok: `${user.name} was added, but the invitation could not be mailed: ${mail.reason}. Pass on this temporary password yourself.`,
      temporaryPassword: password,
    };
  } catch (err) {
    return errorState(err);
  }
}

const changeRoleSchema = z.object({ userId: z.coerce.number().int().positive(), role: z.enum(ROLES) });

/** Changes a user's role (not one's own, so an administrator cannot lock everybody out). */
export async function changeRole(_prev: FormState, form: FormData): Promise<FormState> {
  try {
    const admin = await requirePermission("users.manage");
    const input = changeRoleSchema.parse({ userId: form.get("userId"), role: form.get("role") });
    if (input.userId === admin.id) throw new AppError("conflict", "You cannot change your own role; ask another administrator.");
    const db = getDb();
    const { before, after } = setUserRole(db, input.userId, input.role);
    recordAudit(db, {
      actor: webActor(admin),
      action: "user.role",
      entityType: "user",
      entityId: input.userId,
      before: { role: before.role },
      after: { role: after.role },
    });
    revalidatePath("/people");
    return { ok: `${after.name} is now ${after.role}.` };
  } catch (err) {
    return errorState(err);
  }
}

const setActiveSchema = z.object({ userId: z.coerce.number().int().positive(), active: z.enum(["true", "false"]) });

/** Deactivates or reactivates a user. Deactivated users cannot sign in; their name stays in the records. */
export async function changeActive(_prev: FormState, form: FormData): Promise<FormState> {
  try {
    const admin = await requirePermission("users.manage");
    const input = setActiveSchema.parse({ userId: form.get("userId"), active: form.get("active") });
    const active = input.active === "true";
    if (input.userId === admin.id && !active) throw new AppError("conflict", "You cannot deactivate your own account.");
    const db = getDb();
    const { before, after } = setUserActive(db, input.userId, active);
    recordAudit(db, {
      actor: webActor(admin),
      action: active ? "user.reactivate" : "user.deactivate",
      entityType: "user",
      entityId: input.userId,
      before: { active: before.active },
      after: { active: after.active },
    });
    revalidatePath("/people");
    return { ok: `${after.name} is ${active ? "active again" : "deactivated"}.` };
  } catch (err) {
    return errorState(err);
  }
}
