/**
 * Route handler plumbing: every handler runs inside `answer`, which turns AppError and zod
 * errors into a JSON body `{ error: { code, message, field? } }` with the right status and
 * never shows a stack trace or a driver error.
 */
import "server-only";
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

/** A state-changing request sent from another origin (answers 403). */
export class CrossOriginError extends AppError {
  constructor(origin: string) {
    super("forbidden", `Requests from ${origin.slice(0, 100)} may not change anything here; use the control room's own pages.`);
    this.name = "CrossOriginError";
  }
}

/** A state-changing request whose body is not declared as JSON (answers 415). */
export class JsonRequiredError extends AppError {
  constructor(contentType: string | null) {
    super("bad-input", `Send the request body as JSON with Content-Type: application/json (got ${contentType ? `"${contentType.slice(0, 80)}"` : "none"}).`, {
      field: "content-type",
      expected: "application/json",
    });
    this.name = "JsonRequiredError";
  }
  override get httpStatus(): number {
    return 415;
  }
}

/** Origins the control room answers state-changing requests from: its own (request URL, Host header) and NEXTAUTH_URL's. */
function ownOrigins(req: Request): Set<string> {
  const own = new Set<string>();
  const add = (raw: string | undefined | null) => {
    if (!raw) return;
    try {
      own.add(new URL(raw).origin);
    } catch {
      // not a URL: ignored
    }
  };
  add(req.url);
  const host = req.headers.get("host");
  if (host) add(`${new URL(req.url).protocol}//${host}`);
  add(process.env.NEXTAUTH_URL);
  return own;
}

/**
 * Cross-site request check for state-changing route handlers. A browser sends `Origin` with
 * every POST (Fetch standard, "append a request Origin header"): it must be one of ours. Without
 * `Origin`, a `Sec-Fetch-Site` header other than same-origin or none is refused too; a request
 * with neither comes from a program, not from a page on another site. SameSite=Lax cookies alone
 * do not stop sibling hosts or other ports, which are the same site.
 *
 * @throws CrossOriginError (403)
 */
export function assertSameOrigin(req: Request): void {
  const origin = req.headers.get("origin");
  if (origin !== null) {
    if (origin === "null" || !ownOrigins(req).has(origin)) throw new CrossOriginError(origin);
    return;
  }
  const site = req.headers.get("sec-fetch-site");
  if (site !== null && site !== "same-origin" && site !== "none") throw new CrossOriginError(`a ${site} page`);
}

/**
 * Requires `Content-Type: application/json` (a cross-origin page cannot send it without a CORS
 * preflight, which this server never grants) and returns the parsed body; `{}` for an empty body.
 *
 * @throws JsonRequiredError (415) for another content type; AppError "bad-input" (400) for a body that is not JSON
 */
export async function readJsonBody(req: Request): Promise<unknown> {
  const type = req.headers.get("content-type");
  const mime = type?.split(";")[0].trim().toLowerCase();
  if (mime !== "application/json") throw new JsonRequiredError(type);
  const text = await req.text();
  if (text.trim() === "") return {};
  try {
    return JSON.parse(text) as unknown;
  } catch {
    throw new AppError("bad-input", "body: not valid JSON.", { field: "body" });
  }
}

const PROTOTYPE_KEYS = new Set(["__proto__", "constructor", "prototype"]);

/**
 * Refuses object keys that would reach an object's prototype when copied (`__proto__`,
 * `constructor`, `prototype`), naming the key's path: schema parsing would otherwise drop them
 * without a word.
 *
 * @throws AppError "bad-input" (400)
 */
export function rejectPrototypeKeys(value: unknown, path: string): void {
  if (value === null || typeof value !== "object") return;
  if (Array.isArray(value)) {
    value.forEach((v, i) => rejectPrototypeKeys(v, `${path}[${i}]`));
    return;
  }
  for (const key of Object.keys(value)) {
    const at = `${path}.${key}`;
    if (PROTOTYPE_KEYS.has(key)) throw new AppError("bad-input", `${at}: "${key}" is not allowed as a name.`, { field: at });
    rejectPrototypeKeys((value as Record<string, unknown>)[key], at);
  }
}

/**
 * Runs a state-changing handler: the origin check and the JSON content type first, then the
 * body (parsed JSON, `{}` when empty), failures rendered as JSON like {@link answer}.
 */
export async function answerChange(req: Request, fn: (body: unknown) => Promise<Response> | Response): Promise<Response> {
  return answer(async () => {
    assertSameOrigin(req);
    const body = await readJsonBody(req);
    rejectPrototypeKeys(body, "body");
    return fn(body);
  });
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
