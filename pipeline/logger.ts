/**
 * Step loggers: pino loggers whose lines go to the step_logs table (so the control room can
 * stream them) and, when asked, to the terminal.
 */
import fs from "node:fs";
import path from "node:path";
import pino, { type Logger } from "pino";
import type { Db } from "../db/client";
import { prepareLogInsert } from "../db/queries/logs";

const LEVELS: Record<number, "debug" | "info" | "warn" | "error"> = {
  10: "debug",
  20: "debug",
  30: "info",
  40: "warn",
  50: "error",
  60: "error",
};

export interface LogSinkOptions {
  /** Called with each line for the terminal (already formatted), or undefined for silence. */
  echo?: (level: string, message: string) => void;
  /** Minimum level recorded; default "info". */
  level?: "debug" | "info" | "warn" | "error";
}

/**
 * The log-line ledger: when TRACEWRIGHT_LOG_LEDGER names a folder, every line a logger emits is
 * also appended to <folder>/<pid>.ndjson with whether its insert succeeded. The concurrency
 * figure (scripts/concurrency-figure.ts) compares the ledgers of all processes with step_logs
 * to count lost lines. One small append per line (O_APPEND, whole lines), off unless asked for.
 */
export interface LedgerLine {
  pid: number;
  runId: number;
  runStepId: number | null;
  at: number;
  level: string;
  message: string;
  /** False when the insert into step_logs threw. */
  recorded: boolean;
}

function ledgerFile(): string | null {
  const dir = process.env.TRACEWRIGHT_LOG_LEDGER;
  if (!dir) return null;
  fs.mkdirSync(dir, { recursive: true });
  return path.join(dir, `${process.pid}.ndjson`);
}

/** A logger writing to step_logs for this run (and step, when given). */
export function createRunLogger(db: Db, runId: number, runStepId: number | null, opts: LogSinkOptions = {}): Logger {
  const insert = prepareLogInsert(db);
  const ledger = ledgerFile();
  const destination = {
    write(line: string) {
      let rec: Record<string, unknown>;
      try {
        rec = JSON.parse(line);
      } catch {
        return;
      }
      const { level, time, msg, pid: _pid, hostname: _host, ...rest } = rec as {
        level: number;
        time: number;
        msg?: string;
        pid?: number;
        hostname?: string;
      };
      const lvl = LEVELS[level] ?? "info";
      const message = String(msg ?? "");
      const data = Object.keys(rest).length ? JSON.stringify(rest) : null;
      const at = time ?? Date.now();
      let recorded = true;
      try {
        insert({ runId, runStepId, at, level: lvl, message, dataJson: data });
      } catch {
        // A log line must never break a run (e.g. the database is briefly locked past the timeout).
        recorded = false;
      }
      if (ledger) {
        const entry: LedgerLine = { pid: process.pid, runId, runStepId, at, level: lvl, message, recorded };
        fs.appendFileSync(ledger, `${JSON.stringify(entry)}\n`);
      }
      opts.echo?.(lvl, data ? `${message} ${data}` : message);
    },
  };
  return pino({ level: opts.level ?? "info", base: undefined, timestamp: pino.stdTimeFunctions.epochTime }, destination);
}
