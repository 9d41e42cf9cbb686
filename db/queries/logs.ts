/** Writing log lines of runs and steps (reads are in runs.ts, getStepLogs). */
import type { Db } from "../client";

/**
 * A prepared insert of one log line into step_logs: loggers call it for every line, so the
 * statement is prepared once per logger.
 */
export function prepareLogInsert(db: Db): (line: { runId: number; runStepId: number | null; at: number; level: string; message: string; dataJson: string | null }) => void {
  const insert = db.$client.prepare("insert into step_logs (run_id, run_step_id, at, level, message, data_json) values (?, ?, ?, ?, ?, ?)");
  return (l) => {
    insert.run(l.runId, l.runStepId, l.at, l.level, l.message, l.dataJson);
  };
}
