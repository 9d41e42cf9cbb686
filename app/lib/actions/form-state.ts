import { z } from "zod";
import { toAppError } from "@/pipeline/errors";

/** What a server action hands back to its form. */
export interface FormState {
  ok?: string;
  error?: string;
  /** Field name → message. */
  fields?: Record<string, string>;
  /** Shown to the administrator when an invitation could not be mailed. */
  temporaryPassword?: string;
  /** Where the form goes after success (e.g. the page of what was just created). */
  redirectTo?: string;
}

/** Renders a thrown error as form state (field errors for zod and AppError with a field). */
export function errorState(err: unknown): FormState {
  if (err instanceof z.ZodError) {
    const fields: Record<string, string> = {};
    for (const issue of err.issues) fields[issue.path.join(".") || "_"] = issue.message;
    return { error: "Some fields need attention.", fields };
  }
  const e = toAppError(err);
  if (e.code === "internal") console.error("[action] internal error:", e.cause ?? e);
  return { error: e.message, fields: e.details.field ? { [e.details.field]: e.message } : undefined };
}
