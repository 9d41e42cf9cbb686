"use server";

/**
 * One's own account: which mail notices to get, and setting a password through a mailed link
 * (a forgotten-password reset or an invitation). Asking for a reset and using a link need no
 * session; both are audited.
 */
import { z } from "zod";
import { getDb, writeTransaction } from "@/db/client";
import { recordAudit } from "@/db/queries/audit";
import { controlRoomOrigin, setWantedNoticeKinds } from "@/db/queries/notices";
import { countRecentTokens, issuePasswordToken, usePasswordToken } from "@/db/queries/password-tokens";
import { getUserByEmail, getUserById } from "@/db/queries/users";
import { NOTICE_KINDS } from "@/db/vocabulary";
import { sendPasswordResetLink } from "../mail";
import { requireSignedIn, webActor } from "../session";
import { errorState, type FormState } from "./form-state";

/** Saves which notices the signed-in person gets (checkboxes named by kind, value "on"). */
export async function saveNoticePreferences(_prev: FormState, form: FormData): Promise<FormState> {
  try {
    const user = await requireSignedIn();
    const wanted = NOTICE_KINDS.filter((k) => form.get(k) === "on");
    const { before, after } = writeTransaction(getDb(), (tx) => {
      const change = setWantedNoticeKinds(tx, user.id, wanted);
      recordAudit(tx, { actor: webActor(user), action: "user.notices", entityType: "user", entityId: user.id, before: change.before, after: change.after });
      return change;
    });
    return { ok: after.length === before.length && after.every((k) => before.includes(k)) ? "Nothing changed." : "Your mail notices are saved." };
  } catch (err) {
    return errorState(err);
  }
}

const resetRequestSchema = z.object({ email: z.string().trim().email("Enter the e-mail address you sign in with.") });

/** At most this many reset links per account in RESET_WINDOW_MS (a flood of mails helps nobody). */
const RESETS_PER_WINDOW = 3;
const RESET_WINDOW_MS = 15 * 60_000;

/**
 * Mails a reset link to an active account with this address. The answer is the same whether or
 * not the account exists, and the mail is sent after answering, so neither the words nor the
 * time of the answer tell which addresses have accounts.
 */
export async function requestPasswordReset(_prev: FormState, form: FormData): Promise<FormState> {
  try {
    const input = resetRequestSchema.parse({ email: form.get("email") ?? "" });
    const answer: FormState = {
      ok: `If ${input.email} has an account here, a link to choose a new password is on its way. It works once, within an hour.`,
    };
    const db = getDb();
    const user = getUserByEmail(db, input.email);
    if (!user || !user.active) return answer;
    if (countRecentTokens(db, user.id, "reset", new Date(Date.now() - RESET_WINDOW_MS)) >= RESETS_PER_WINDOW) return answer;
    const link = writeTransaction(db, (tx) => {
      const issued = issuePasswordToken(tx, user.id, "reset");
      recordAudit(tx, { actor: { userId: null, label: user.email, door: "web" }, action: "user.password-reset-request", entityType: "user", entityId: user.id });
      return issued;
    });
    void sendPasswordResetLink({ to: user.email, name: user.name, link: `${controlRoomOrigin()}/set-password?token=${link.token}`, expiresAt: link.expiresAt }).then(
      (r) => {
        if (!r.sent) console.error(`[mail] reset link for user ${user.id} not sent: ${r.reason}`);
      },
    );
    return answer;
  } catch (err) {
    return errorState(err);
  }
}

const setPasswordSchema = z
  .object({
    token: z.string().min(1, "The link is incomplete: copy the whole link from the mail."),
    next: z.string().min(10, "Passwords need 10 characters or more.").max(200),
    repeat: z.string().max(200),
  })
  .refine((v) => v.next === v.repeat, { path: ["repeat"], message: "The two new passwords differ." });

/** Sets a password through a mailed link (once, before it expires); the person then signs in with it. */
export async function setPasswordWithLink(_prev: FormState, form: FormData): Promise<FormState> {
  try {
    const input = setPasswordSchema.parse({ token: form.get("token") ?? "", next: form.get("next") ?? "", repeat: form.get("repeat") ?? "" });
    const db = getDb();
    const done = writeTransaction(db, (tx) => {
      const used = usePasswordToken(tx, input.token, input.next);
      const user = getUserById(tx, used.userId)!;
      recordAudit(tx, {
        actor: { userId: user.id, label: user.name, door: "web" },
        action: used.purpose === "reset" ? "user.password-reset" : "user.password-invitation",
        entityType: "user",
        entityId: user.id,
      });
      return user;
    });
    return { ok: `Your password is set, ${done.name}. Sign in with ${done.email} and your new password.` };
  } catch (err) {
    return errorState(err);
  }
}
