/**
 * One error type for every failure a person can act on. Each door renders it its own way:
 * the CLI prints the message and exits with `exitCode`, route handlers answer JSON with
 * `httpStatus`, server actions return field errors.
 */
import { RecordError } from "../db/errors";

export type AppErrorCode =
  | "bad-input" // a file, field or option is malformed; names where and what was expected
  | "bad-file" // a field file is malformed or truncated (file name and byte offset)
  | "not-found" // a run, step, artifact, user or file does not exist
  | "forbidden" // the role may not do this
  | "conflict" // the state does not allow it (e.g. rerun of a running run)
  | "step-failed" // a step threw while running
  | "cancelled" // the run was cancelled
  | "store-unavailable" // the object store refused or could not be reached; names the setting and the key
  | "internal"; // a bug: logged with its cause, shown as a short message

const EXIT: Record<AppErrorCode, number> = {
  "bad-input": 2,
  "bad-file": 2,
  "not-found": 2,
  forbidden: 2,
  conflict: 2,
  "step-failed": 1,
  cancelled: 1,
  "store-unavailable": 1,
  internal: 1,
};

const HTTP: Record<AppErrorCode, number> = {
  "bad-input": 400,
  "bad-file": 422,
  "not-found": 404,
  forbidden: 403,
  conflict: 409,
  "step-failed": 500,
  cancelled: 409,
  "store-unavailable": 503,
  internal: 500,
};

export interface AppErrorDetails {
  /** File the problem is in. */
  file?: string;
  /** 1-based line in a text file. */
  line?: number;
  /** Byte offset in a binary file. */
  byteOffset?: number;
  /** Field, option or parameter path, e.g. "steps[2].settings.lowCutHz". */
  field?: string;
  /** What was expected there. */
  expected?: string;
  /** Valid choices, for unknown names. */
  choices?: string[];
}

export class AppError extends Error {
  readonly code: AppErrorCode;
  readonly details: AppErrorDetails;
  constructor(code: AppErrorCode, message: string, details: AppErrorDetails = {}, options?: { cause?: unknown }) {
    super(message, options);
    this.name = "AppError";
    this.code = code;
    this.details = details;
  }
  get exitCode(): number {
    return EXIT[this.code];
  }
  get httpStatus(): number {
    return HTTP[this.code];
  }
}

/** A malformed or truncated binary field file: names the file and byte offset. */
export class FileFormatError extends AppError {
  constructor(file: string, byteOffset: number, message: string, expected?: string) {
    super("bad-file", `${file}: byte ${byteOffset}: ${message}${expected ? ` (expected ${expected})` : ""}`, {
      file,
      byteOffset,
      expected,
    });
    this.name = "FileFormatError";
  }
}

/** Turns anything thrown into an AppError, keeping AppErrors as they are. */
export function toAppError(err: unknown): AppError {
  if (err instanceof AppError) return err;
  if (err instanceof RecordError) return new AppError(err.code, err.message, err.field ? { field: err.field } : {}, { cause: err });
  if (err instanceof Error && err.name === "AbortError") return new AppError("cancelled", "The run was cancelled.");
  // The solver's refusals of a grid, time step or position (FdSetupError, also when it comes
  // back from a worker thread with only its name) are input errors of the step that asked.
  if (err instanceof Error && (err.name === "StepInputError" || err.name === "FdSetupError")) return new AppError("bad-input", err.message, {
    field: (err as Error & { field?: string }).field,
  });
  const msg = err instanceof Error ? err.message : String(err);
  return new AppError("internal", `Unexpected error: ${msg}`, {}, { cause: err });
}
