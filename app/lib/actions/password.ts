"use server";

/**
 * The signed-in person changes their own password: required at the first sign-in after an
 * administrator issued a temporary one, allowed at any time. Recorded in the audit trail
 * (without the password).
 */
import { z } from "zod";
import { getDb, writeTransaction } from "@/db/client";
import { recordAudit } from "@/db/queries/audit";
import { checkPassword, setUserPassword } from "@/db/queries/users";
import { requireSignedIn, webActor } from "../session";
import { errorState, type FormState } from "./form-state";

const changePasswordSchema = z
  .object({
    current: z.string().min(1, "Enter the password you signed in with.").max(200),
    next: z.string().min(10, "Passwords need 10 characters or more.").max(200),
    repeat: z.string().max(200),
  })
  .refine((v) => v.next === v.repeat, { path: ["repeat"], message: "The two new passwords differ." })
  .refine((v) => v.next !== v.current, { path: ["next"], message: "Choose a password other than the temporary one." });

/** Changes the signed-in user's password after checking the current one (the form then goes to the runs list). */
export async function changeOwnPassword(_prev: FormState, form: FormData): Promise<FormState> {
  try {
    const user = await requireSignedIn();
    const input = changePasswordSchema.parse({ current: form.get("current") ?? "", next: form.get("next") ?? "", repeat: form.get("repeat") ?? "" });
    const db = getDb();
    if (!(await checkPassword(db, user.id, input.current))) {
      return { error: "Some fields need attention.", fields: { current: "This is not your current password." } };
    }
    writeTransaction(db, (tx) => {
      setUserPassword(tx, user.id, input.next);
      recordAudit(tx, { actor: webActor(user), action: "user.password", entityType: "user", entityId: user.id, after: { temporaryReplaced: user.mustChangePassword } });
    });
    return { ok: "Your password is changed." };
  } catch (err) {
    return errorState(err);
  }
}
