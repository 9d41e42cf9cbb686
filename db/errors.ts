/**
 * The error the database layer throws when a record does not exist or a change is not allowed.
 * The doors turn it into their own error (pipeline/errors.ts toAppError keeps code, message and
 * field), so db/ depends on nothing above it.
 */
export type RecordErrorCode = "not-found" | "conflict" | "bad-input";

export class RecordError extends Error {
  constructor(
    readonly code: RecordErrorCode,
    message: string,
    /** The field or parameter the problem is about, when there is one. */
    readonly field?: string,
  ) {
    super(message);
    this.name = "RecordError";
  }
}
