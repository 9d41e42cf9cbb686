/**
 * Starting runs from a door that must not wait for them (the control room): the run is queued
 * in SQLite with createRun (pipeline/run-create.ts), then handed to a detached engine process
 * that executes it with the worker pool. The request that queued it returns at once.
 */
import path from "node:path";
import { spawn } from "node:child_process";
import fs from "node:fs";
import { dataDir, projectRoot } from "../db/paths";

/**
 * Starts a detached engine process that executes queued run `runId`. Its output goes to
 * <data>/logs/run-<id>.log; its logs also go to SQLite like any run.
 */
export function launchInBackground(runId: number, onLaunchFailure?: (err: Error) => void): void {
  const logs = path.join(dataDir(), "logs");
  fs.mkdirSync(logs, { recursive: true });
  const out = fs.openSync(path.join(logs, `run-${runId}.log`), "a");
  const cli = path.join(projectRoot, "cli", "index.ts");
  const child = spawn(process.execPath, ["--import", "tsx", cli, "execute-run", String(runId)], {
    cwd: projectRoot,
    detached: true,
    stdio: ["ignore", out, out],
    env: { ...process.env, TRACEWRIGHT_DATA_DIR: dataDir() },
  });
  // A failed start must not take the server down: record it on the run instead.
  child.on("error", (err) => {
    try {
      fs.appendFileSync(path.join(logs, `run-${runId}.log`), `could not start the engine process: ${err.message}\n`);
      onLaunchFailure?.(err);
    } catch {
      // nothing more to do: the run stays queued and can be cancelled and resumed
    }
  });
  child.unref();
  fs.closeSync(out);
}

/**
 * Starts a detached `tracewright reproduce <run> --reproduction <id>` for a reproduction the
 * control room recorded. Its output goes to <data>/logs/reproduction-<id>.log; progress and the
 * verdict go to the reproduction's record.
 */
export function launchReproductionInBackground(runId: number, reproductionId: number, onLaunchFailure?: (err: Error) => void): void {
  const logs = path.join(dataDir(), "logs");
  fs.mkdirSync(logs, { recursive: true });
  const log = path.join(logs, `reproduction-${reproductionId}.log`);
  const out = fs.openSync(log, "a");
  const cli = path.join(projectRoot, "cli", "index.ts");
  const child = spawn(process.execPath, ["--import", "tsx", cli, "reproduce", String(runId), "--reproduction", String(reproductionId)], {
    cwd: projectRoot,
    detached: true,
    stdio: ["ignore", out, out],
    // The requester is recorded with the reproduction; the process acts for them.
    env: { ...process.env, TRACEWRIGHT_DATA_DIR: dataDir() },
  });
  child.on("error", (err) => {
    try {
      fs.appendFileSync(log, `could not start the reproduction process: ${err.message}\n`);
      onLaunchFailure?.(err);
    } catch {
      // the reproduction stays "running" with no process; the run page shows it as stopped
    }
  });
  child.unref();
  fs.closeSync(out);
}
