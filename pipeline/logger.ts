/**
 * Step loggers: pino loggers whose lines go to the step_logs table (so the control room can
 * stream them) and, when asked, to the terminal.
 */
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

/** A logger writing to step_logs for this run (and step, when given). */
export function createRunLogger(db: Db, runId: number, runStepId: number | null, opts: LogSinkOptions = {}): Logger {
  const insert = prepareLogInsert(db);
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
      try {
        insert({ runId, runStepId, at: time ?? Date.now(), level: lvl, message, dataJson: data });
      } catch {
        // A log line must never break a run (e.g. the database is briefly locked past the timeout).
      }
      opts.echo?.(lvl, data ? `${message} ${data}` : message);
    },
  };
  return pino({ level: opts.level ?? "info", base: undefined, timestamp: pino.stdTimeFunctions.epochTime }, destination);
}
