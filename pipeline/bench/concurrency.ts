/**
 * Counting for the concurrency figure (scripts/concurrency-figure.ts): busy errors in what the
 * processes printed and logged, and log lines emitted (the loggers' ledgers, pipeline/logger.ts)
 * that are not in step_logs afterwards.
 */
import type { LedgerLine } from "../logger";

/** What SQLite and better-sqlite3 say when a write lock could not be had: the code, or its message. */
const BUSY = /SQLITE_BUSY|database is locked|database table is locked/i;

/** Lines of `text` that report a busy or locked database. */
export function busyLines(text: string): string[] {
  return text.split(/\r?\n/).filter((l) => BUSY.test(l));
}

/** Ledger lines from the text of one or more ledger files (one JSON object a line); unreadable lines are counted. */
export function parseLedger(text: string): { lines: LedgerLine[]; unreadable: number } {
  const lines: LedgerLine[] = [];
  let unreadable = 0;
  for (const raw of text.split("\n")) {
    if (!raw.trim()) continue;
    try {
      const l = JSON.parse(raw) as LedgerLine;
      if (typeof l.runId !== "number" || typeof l.message !== "string" || typeof l.at !== "number") throw new Error("shape");
      lines.push(l);
    } catch {
      unreadable++;
    }
  }
  return { lines, unreadable };
}

/** A log line as stored in step_logs (at in ms since the epoch). */
export interface StoredLogLine {
  runId: number;
  runStepId: number | null;
  at: number;
  level: string;
  message: string;
}

export interface LedgerComparison {
  /** Lines the processes emitted (ledger lines). */
  emitted: number;
  /** Of these, lines whose insert threw (the logger's own account). */
  insertFailed: number;
  /** Emitted lines with no stored line left to match them (run, step, time, level and message equal). */
  missing: number;
  /** Up to ten of the missing lines, for the report. */
  missingExamples: LedgerLine[];
  /** Runs the ledgers name. */
  runs: number;
}

const keyOf = (l: StoredLogLine) => `${l.runId}\u0000${l.runStepId ?? ""}\u0000${l.at}\u0000${l.level}\u0000${l.message}`;

/**
 * Matches emitted lines against stored ones as multisets (two identical lines in the same
 * millisecond need two stored rows). Stored lines of runs no ledger names are ignored: other
 * processes (before the measurement) wrote them.
 */
export function compareLedger(emitted: LedgerLine[], stored: StoredLogLine[]): LedgerComparison {
  const available = new Map<string, number>();
  for (const s of stored) available.set(keyOf(s), (available.get(keyOf(s)) ?? 0) + 1);
  let missing = 0;
  const missingExamples: LedgerLine[] = [];
  for (const e of emitted) {
    const k = keyOf(e);
    const n = available.get(k) ?? 0;
    if (n > 0) {
      available.set(k, n - 1);
      continue;
    }
    missing++;
    if (missingExamples.length < 10) missingExamples.push(e);
  }
  return {
    emitted: emitted.length,
    insertFailed: emitted.filter((e) => !e.recorded).length,
    missing,
    missingExamples,
    runs: new Set(emitted.map((e) => e.runId)).size,
  };
}
