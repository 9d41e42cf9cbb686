/**
 * Route handler plumbing: every handler runs inside `answer`, which turns AppError and zod
 * errors into a JSON body `{ error: { code, message, field? } }` with the right status and
 * never shows a stack trace or a driver error.
 */
import { NextResponse } from "next/server";
import { z } from "zod";
import { AppError, toAppError } from "@/pipeline/errors";

/** JSON error body of every failed API call. */
export interface ApiErrorBody {
  error: { code: string; message: string; field?: string; fields?: Record<string, string> };
}

/** Turns anything thrown into a JSON error response. */
export function errorResponse(err: unknown): NextResponse<ApiErrorBody> {
  if (err instanceof z.ZodError) {
    const fields: Record<string, string> = {};
    for (const issue of err.issues) fields[issue.path.join(".") || "_"] = issue.message;
    const first = err.issues[0];
    const where = first?.path.join(".") || "request";
    return NextResponse.json(
      { error: { code: "bad-input", message: `${where}: ${first?.message ?? "invalid"}`, field: where, fields } },
      { status: 400 },
    );
  }
  const appErr = toAppError(err);
  if (appErr.code === "internal") console.error("[api] internal error:", appErr.cause ?? appErr);
  const body: ApiErrorBody = { error: { code: appErr.code, message: appErr.message } };
  if (appErr.details.field) body.error.field = appErr.details.field;
  return NextResponse.json(body, { status: appErr.httpStatus });
}

/** Runs a handler body and renders failures as JSON. */
export async function answer(fn: () => Promise<Response> | Response): Promise<Response> {
  try {
    return await fn();
  } catch (err) {
    return errorResponse(err);
  }
}

/** Parses `value` with `schema`, throwing AppError "bad-input" naming the field on failure. */
export function parseOr400<S extends z.ZodType>(schema: S, value: unknown, what: string): z.output<S> {
  const parsed = schema.safeParse(value);
  if (parsed.success) return parsed.data;
  const issue = parsed.error.issues[0];
  const field = issue?.path.length ? issue.path.join(".") : what;
  throw new AppError("bad-input", `${what}${issue?.path.length ? "." + field : ""}: ${issue?.message ?? "invalid"}`, {
    field,
  });
}

/** A positive integer id from a route segment. */
export const idSchema = z.coerce.number().int().positive();

/** Parses a route id, answering 400 "bad-input" when it is not a positive integer. */
export function parseId(raw: string, name: string): number {
  const parsed = idSchema.safeParse(raw);
  if (!parsed.success) throw new AppError("bad-input", `${name} must be a positive whole number, got "${raw}".`, { field: name });
  return parsed.data;
}
