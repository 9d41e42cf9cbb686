/**
 * The concurrency figure: the command line, a watcher and the control room writing one database
 * at once for a stated time, then counting busy errors and lost log lines.
 *
 *   npm run bench:concurrency -- --data <data folder> [--seconds 60] [--feed-every 8] [--cli-records 8] [--out <file.json>] [--work <folder>]
 *
 * Use a copy of a prepared data folder (`cp -a /work/final-data /tmp/my-data`): the figure adds
 * runs, reviews, profiles and audit events to it. At once, until the time is up:
 *   - the command line: `tracewright run examples/quillmoor/qm1-processing.yaml --field-data <f>`
 *     in a loop, each on --cli-records consecutive field records from a random one (default 8:
 *     two source points of the demo line, with the geometry table), so every step computes and
 *     writes artifacts, step records and log lines;
 *   - the watcher: `tracewright watch <inbox> --pipeline examples/quillmoor/qm1-field-check.yaml`,
 *     while the figure copies a field folder into the inbox every few
 *     seconds, file by file (all records but two chosen at random: the watcher skips a folder whose
 *     content it has run before), then drops the READY marker;
 *   - the control room: `next start` on loopback (built first when the build is missing or older
 *     than the sources) and a lead who signs in over HTTP and keeps approving and sending back runs,
 *     (the run page's server action and the reviews route handler), saving interpretations of
 *     approved runs (the report page's server action), rerunning from the mute step with another
 *     taper (each rerun starts an engine process that writes too), adding profiles to the survey
 *     and signing in again.
 * Afterwards it waits for the runs started in the window to finish, stops everything and counts:
 *   - busy errors: lines saying SQLITE_BUSY or "database is locked" in everything each process
 *     printed, in the engine processes' log files, in the control room's answers and in the
 *     errors of the runs;
 *   - lost log lines: every process writes a ledger of the log lines it emitted
 *     (TRACEWRIGHT_LOG_LEDGER, pipeline/logger.ts); each must be in step_logs afterwards;
 *   - `PRAGMA integrity_check` and the audit chain (`tracewright audit verify`).
 * Prints a table and writes the figures as JSON (--out, default <work>/concurrency-figure.json).
 * Exits 1 when any count is not zero or a check fails.
 */
import { randomInt } from "node:crypto";
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { execa, type ResultPromise } from "execa";
import { openDatabase, type Db } from "../db/client";
import { projectRoot } from "../db/paths";
import { databaseIntegrity } from "../db/queries/artifacts";
import { getRun, getStepLogs, listRuns } from "../db/queries/runs";
import { DEMO_ACCOUNTS } from "../db/seed";
import { busyLines, compareLedger, parseLedger, type LedgerComparison, type StoredLogLine } from "../pipeline/bench/concurrency";
import { describeMachine, formatMachine, type MachineDescription } from "../pipeline/bench/machine";
import { ensureBuild, startServer } from "../tests/e2e/harness";
import { signInOverHttp } from "./http-session";

function argValue(args: string[], name: string, fallback?: string): string | undefined {
  const i = args.indexOf(name);
  return i >= 0 && i + 1 < args.length ? args[i + 1] : fallback;
}

const FINAL = new Set(["succeeded", "failed", "cancelled", "interrupted"]);
const PROCESSING = "examples/quillmoor/qm1-processing.yaml";
const FIELD_CHECK = "examples/quillmoor/qm1-field-check.yaml";
const cliPath = path.join(projectRoot, "cli", "index.ts");
const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

interface WriterFigure {
  /** What the writer did, e.g. "runs" or "requests". */
  actions: number;
  ok: number;
  failed: number;
  busyErrors: number;
  /** Up to five of the failures, as printed. */
  failures: string[];
}

export interface ConcurrencyFigure {
  machine: MachineDescription;
  loadAverageAfter: [number, number, number];
  seconds: number;
  /** From the start until the last command-line run ended (it is not cut short). */
  wallSeconds: number;
  commandLine: WriterFigure;
  watcher: WriterFigure & { foldersCopied: number; skipped: number };
  controlRoom: WriterFigure & { byKind: Record<string, { ok: number; failed: number }> };
  /** Engine processes the control room's reruns started (their log files). */
  engineProcesses: { logFiles: number; busyErrors: number };
  runs: { started: number; byDoor: Record<string, number>; byStatus: Record<string, number>; unfinished: number; busyErrors: number };
  logLines: LedgerComparison & { unreadableLedgerLines: number };
  busyErrors: number;
  integrity: string[];
  auditChain: { intact: boolean; checked: number; text: string };
}

function emptyWriter(): WriterFigure {
  return { actions: 0, ok: 0, failed: 0, busyErrors: 0, failures: [] };
}

/** The field records (.sg2) of the field folder, and its other files (the geometry table), sorted by name. */
function fieldFiles(folder: string): { records: string[]; others: string[] } {
  const all = fs.readdirSync(folder).sort();
  return { records: all.filter((f) => /\.sg2$/i.test(f)), others: all.filter((f) => !/\.sg2$/i.test(f)) };
}

async function main(): Promise<number> {
  const args = process.argv.slice(2);
  const dataArg = argValue(args, "--data");
  if (!dataArg) {
    process.stderr.write("usage: npm run bench:concurrency -- --data <copy of a prepared data folder> [--seconds 60] [--feed-every 8] [--out file.json]\n");
    return 2;
  }
  const dataDir = path.resolve(dataArg);
  const dbFile = path.join(dataDir, "tracewright.db");
  if (!fs.existsSync(dbFile)) throw new Error(`${dbFile}: no database there (copy a prepared data folder first)`);
  const seconds = Number(argValue(args, "--seconds", "60"));
  const feedEveryS = Number(argValue(args, "--feed-every", "8"));
  const cliRecords = Number(argValue(args, "--cli-records", "8"));
  if (!(Number.isInteger(cliRecords) && cliRecords >= 1)) throw new Error("--cli-records: expected a whole number of at least 1");
  if (!(seconds > 0) || !(feedEveryS > 0)) throw new Error("--seconds and --feed-every: expected positive numbers");
  const work = path.resolve(argValue(args, "--work") ?? fs.mkdtempSync(path.join(os.tmpdir(), "tw-concurrency-")));
  const fieldSrc = path.resolve(argValue(args, "--field-data") ?? path.join(dataDir, "examples", "quillmoor", "field"));
  const out = path.resolve(argValue(args, "--out") ?? path.join(work, "concurrency-figure.json"));
  const ledgerDir = path.join(work, "ledger");
  const inbox = path.join(work, "inbox");
  const subsets = path.join(work, "cli-field");
  for (const d of [ledgerDir, inbox, subsets]) {
    fs.rmSync(d, { recursive: true, force: true });
    fs.mkdirSync(d, { recursive: true });
  }
  const lead = DEMO_ACCOUNTS.find((a) => a.role === "lead")!;
  const processor = DEMO_ACCOUNTS.find((a) => a.role === "processor")!;
  const env = { TRACEWRIGHT_DATA_DIR: dataDir, TRACEWRIGHT_DB: dbFile, TRACEWRIGHT_LOG_LEDGER: ledgerDir };
  const cli = (argv: string[]) => execa(process.execPath, ["--import", "tsx", cliPath, ...argv], { cwd: projectRoot, env: { ...process.env, ...env }, reject: false, all: true });
  const { records, others } = fieldFiles(fieldSrc);
  if (records.length < 2) throw new Error(`${fieldSrc}: expected field records (.sg2)`);

  // What is there before: runs and engine log files (only what the window adds is counted).
  let db: Db = openDatabase(dbFile);
  const firstRunId = (listRuns(db, { pageSize: 1 }).rows[0]?.id ?? 0) + 1;
  db.$client.close();
  const logsDir = path.join(dataDir, "logs");
  const logSizes = new Map<string, number>();
  if (fs.existsSync(logsDir)) for (const f of fs.readdirSync(logsDir)) logSizes.set(f, fs.statSync(path.join(logsDir, f)).size);

  const machine = describeMachine();
  process.stderr.write(`machine: ${formatMachine(machine)}\n`);
  process.stderr.write("building the control room when needed...\n");
  await ensureBuild();
  const server = await startServer(dataDir, { TRACEWRIGHT_LOG_LEDGER: ledgerDir });
  process.stderr.write(`control room on ${server.origin}; watcher on ${inbox}\n`);

  const watcher: ResultPromise = cli(["watch", inbox, "--pipeline", FIELD_CHECK, "--settle-seconds", "1", "--quiet-seconds", "600", "--as", lead.email]);
  let watcherLive = "";
  await new Promise<void>((resolve, reject) => {
    const timer = setTimeout(() => reject(new Error("the watcher did not start within 60 s")), 60_000);
    watcher.stderr?.on("data", (b: Buffer) => {
      watcherLive += b.toString();
      if (watcherLive.includes("watching ")) {
        clearTimeout(timer);
        resolve();
      }
    });
  });
  /** Folders the watcher has finished with: a run ended ("run <id> <status>") or was skipped (content run before). */
  const watcherDone = () => (watcherLive.match(/^run \d+ \w+/gm)?.length ?? 0) + (watcherLive.match(/^\S+ run-skipped /gm)?.length ?? 0);

  const started = Date.now();
  const deadline = started + seconds * 1000;
  process.stderr.write(`writing at once for ${seconds} s...\n`);

  // (a) The command line.
  const commandLine = emptyWriter();
  const cliOutputs: string[] = [];
  const cliLoop = (async () => {
    for (let k = 0; Date.now() < deadline; k++) {
      const folder = path.join(subsets, `subset-${k}`);
      fs.mkdirSync(folder);
      const first = randomInt(records.length);
      const window = Array.from({ length: Math.min(cliRecords, records.length) }, (_, i) => records[(first + i) % records.length]);
      for (const f of [...window, ...others]) fs.linkSync(path.join(fieldSrc, f), path.join(folder, f));
      const r = await cli(["run", PROCESSING, "--field-data", folder, "--as", processor.email, "--verbose"]);
      cliOutputs.push(r.all ?? "");
      commandLine.actions++;
      if (r.exitCode === 0) commandLine.ok++;
      else {
        commandLine.failed++;
        if (commandLine.failures.length < 5) commandLine.failures.push((r.all ?? "").split("\n").slice(-3).join(" | "));
      }
    }
  })();

  // (b) Field folders copied into the watched inbox, file by file, then the READY marker.
  let foldersCopied = 0;
  const feedLoop = (async () => {
    for (let k = 0; Date.now() < deadline; k++) {
      const folder = path.join(inbox, `field-${String(k).padStart(3, "0")}`);
      fs.mkdirSync(folder);
      const a = randomInt(records.length);
      const leftOut = new Set([records[a], records[(a + 1 + randomInt(records.length - 1)) % records.length]]);
      for (const f of [...others, ...records]) if (!leftOut.has(f)) fs.copyFileSync(path.join(fieldSrc, f), path.join(folder, f));
      fs.writeFileSync(path.join(folder, "READY"), "");
      foldersCopied++;
      const wait = deadline - Date.now();
      if (wait > 0) await sleep(Math.min(wait, feedEveryS * 1000));
    }
  })();

  // (c) The control room: a lead signed in over HTTP.
  const controlRoom = { ...emptyWriter(), byKind: {} as Record<string, { ok: number; failed: number }> };
  const webBodies: string[] = [];
  const webLoop = (async () => {
    let cookie = await signInOverHttp(server.origin, lead.email, lead.password);
    const count = (kind: string, ok: boolean, detail: string) => {
      controlRoom.actions++;
      controlRoom.byKind[kind] ??= { ok: 0, failed: 0 };
      if (ok) {
        controlRoom.ok++;
        controlRoom.byKind[kind].ok++;
      } else {
        controlRoom.failed++;
        controlRoom.byKind[kind].failed++;
        if (controlRoom.failures.length < 5) controlRoom.failures.push(`${kind}: ${detail}`);
      }
    };
    const post = async (kind: string, url: string, body: unknown, okStatus: number[]) => {
      const res = await fetch(`${server.origin}${url}`, {
        method: "POST",
        headers: { cookie, origin: server.origin, "content-type": "application/json" },
        body: JSON.stringify(body),
      });
      const text = await res.text();
      webBodies.push(text);
      count(kind, okStatus.includes(res.status), `${res.status} ${text.slice(0, 200)}`);
      return { status: res.status, text };
    };
    // Server actions as the pages call them: POST to the page with the action's id (from the
    // build's manifest) and the arguments as JSON; the answer's flight data holds { ok } or { error }.
    const manifest = JSON.parse(fs.readFileSync(path.join(projectRoot, ".next", "server", "server-reference-manifest.json"), "utf8")) as {
      node: Record<string, { exportedName?: string }>;
    };
    const actionId = (name: string) => {
      const hit = Object.entries(manifest.node).find(([, v]) => v.exportedName === name);
      if (!hit) throw new Error(`no server action ${name} in the build`);
      return hit[0];
    };
    const serverAction = async (name: string, page: string, arg: unknown) => {
      const res = await fetch(`${server.origin}${page}`, {
        method: "POST",
        headers: { cookie, origin: server.origin, "next-action": actionId(name), "content-type": "text/plain;charset=UTF-8", accept: "text/x-component" },
        body: JSON.stringify([arg]),
      });
      const text = await res.text();
      webBodies.push(text);
      const state = /\{"(ok|error)":"((?:[^"\\]|\\.)*)"/.exec(text);
      count(name, res.status === 200 && state?.[1] === "ok", `${res.status} ${state?.[2] ?? text.slice(0, 200)}`);
    };
    for (let k = 0; Date.now() < deadline; k++) {
      const list = await fetch(`${server.origin}/api/runs?status=succeeded&pageSize=10`, { headers: { cookie } });
      const listText = await list.text();
      if (!list.ok) {
        webBodies.push(listText);
        count("read runs", false, `${list.status} ${listText.slice(0, 200)}`);
        await sleep(500);
        continue;
      }
      const rows = (JSON.parse(listText) as { rows: Array<{ id: number; pipelineName: string; review: { decision: string } | null }> }).rows;
      for (const [i, r] of rows.slice(0, 3).entries()) {
        const decision = r.review?.decision === "approved" ? "returned" : "approved";
        const comment = `concurrency figure, round ${k}`;
        // One decision through the page's server action, the others through the route handler.
        if (i === 0) await serverAction("decideRun", `/runs/${r.id}`, { runId: r.id, decision, comment });
        else await post("review", `/api/runs/${r.id}/reviews`, { decision, comment }, [201]);
        if (decision === "approved" && k % 2 === 0) {
          await serverAction("saveRunInterpretation", `/runs/${r.id}/report`, { runId: r.id, sections: { summary: `Interpretation written during the concurrency figure, round ${k}.` } });
        }
      }
      const processing = rows.find((r) => r.pipelineName === "quillmoor-qm1-processing");
      if (processing && k % 4 === 0) {
        await post("rerun", `/api/runs/${processing.id}/rerun`, { fromLabel: "mute", overrides: { mute: { taperMs: 4 + ((k / 4) % 40) * 0.25 } } }, [202]);
      }
      if (k % 3 === 0) {
        await post("add profile", "/api/surveys/quillmoor/profiles", { name: `CF-${process.pid}-${k}`, description: "added by the concurrency figure", crs: "EPSG:27700", startX: 0, startY: 0, endX: 47, endY: 0 }, [201]);
      }
      if (k % 5 === 4) {
        try {
          cookie = await signInOverHttp(server.origin, lead.email, lead.password);
          count("sign-in", true, "");
        } catch (err) {
          count("sign-in", false, (err as Error).message);
        }
      }
      await sleep(250);
    }
  })();

  await Promise.all([cliLoop, feedLoop, webLoop]);
  const wallSeconds = (Date.now() - started) / 1000;
  process.stderr.write(`time is up (${wallSeconds.toFixed(0)} s with the last command-line run); waiting for the runs started in the window to finish...\n`);

  // Runs started in the window finish (the watcher may still be settling its last folder).
  db = openDatabase(dbFile);
  const windowRuns = () => listRuns(db, { pageSize: 1000 }).rows.filter((r) => r.id >= firstRunId);
  const settleDeadline = Date.now() + 180_000;
  await sleep(3000);
  while (Date.now() < settleDeadline && (watcherDone() < foldersCopied || windowRuns().some((r) => !FINAL.has(r.status)))) await sleep(1000);
  const runsNow = windowRuns();
  db.$client.close();

  watcher.kill("SIGTERM");
  const watcherResult = await watcher;
  await server.stop();
  const serverResult = await server.process;

  // Everything each process printed stays in the work folder.
  const watcherText = String(watcherResult.all ?? "");
  fs.writeFileSync(path.join(work, "watcher.log"), watcherText);
  fs.writeFileSync(path.join(work, "server.log"), String(serverResult.all ?? ""));
  fs.writeFileSync(path.join(work, "command-line.log"), cliOutputs.join("\n"));
  // The watcher's runs: what it printed ("run <id> <status>").
  const watcherFig = { ...emptyWriter(), foldersCopied, skipped: watcherText.match(/^\S+ run-skipped /gm)?.length ?? 0 };
  for (const m of watcherText.matchAll(/^run (\d+) (\w+)(?::\s*(.*))?$/gm)) {
    watcherFig.actions++;
    if (m[2] === "succeeded") watcherFig.ok++;
    else {
      watcherFig.failed++;
      if (watcherFig.failures.length < 5) watcherFig.failures.push(m[0]);
    }
  }
  watcherFig.busyErrors = busyLines(watcherText).length;
  commandLine.busyErrors = cliOutputs.reduce((n, t) => n + busyLines(t).length, 0);
  controlRoom.busyErrors = busyLines(String(serverResult.all ?? "")).length + webBodies.reduce((n, t) => n + busyLines(t).length, 0);

  // Engine processes: what the window added to <data>/logs.
  const engine = { logFiles: 0, busyErrors: 0 };
  if (fs.existsSync(logsDir)) {
    for (const f of fs.readdirSync(logsDir)) {
      const buf = fs.readFileSync(path.join(logsDir, f));
      const from = logSizes.get(f) ?? 0;
      if (buf.length <= from) continue;
      engine.logFiles++;
      engine.busyErrors += busyLines(buf.subarray(from).toString("utf8")).length;
    }
  }

  // Runs of the window and their log lines against the ledgers.
  db = openDatabase(dbFile);
  const byDoor: Record<string, number> = {};
  const byStatus: Record<string, number> = {};
  let runBusy = 0;
  const stored: StoredLogLine[] = [];
  for (const r of runsNow) {
    byDoor[r.door] = (byDoor[r.door] ?? 0) + 1;
    const detail = getRun(db, r.id);
    const status = detail?.status ?? r.status;
    byStatus[status] = (byStatus[status] ?? 0) + 1;
    if (detail?.error) runBusy += busyLines(detail.error).length;
  }
  let ledgerText = "";
  for (const f of fs.readdirSync(ledgerDir)) ledgerText += fs.readFileSync(path.join(ledgerDir, f), "utf8");
  const ledger = parseLedger(ledgerText);
  for (const runId of new Set(ledger.lines.map((l) => l.runId))) {
    for (let afterId = 0; ; ) {
      const page = getStepLogs(db, { runId, afterId, limit: 5000 });
      for (const l of page) stored.push({ runId: l.runId, runStepId: l.runStepId, at: l.at.getTime(), level: l.level, message: l.message });
      if (page.length < 5000) break;
      afterId = page[page.length - 1].id;
    }
  }
  const logLines = { ...compareLedger(ledger.lines, stored), unreadableLedgerLines: ledger.unreadable };
  const integrity = databaseIntegrity(db);
  db.$client.close();
  const audit = await cli(["audit", "verify", "--json"]);
  let auditChain = { intact: false, checked: 0, text: audit.all ?? "" };
  try {
    const v = JSON.parse(audit.stdout) as { ok: boolean; checked: number };
    auditChain = { intact: audit.exitCode === 0 && v.ok === true, checked: v.checked, text: v.ok ? "" : (audit.all ?? "") };
  } catch {
    // the text stays for the report
  }

  const busyErrors = commandLine.busyErrors + watcherFig.busyErrors + controlRoom.busyErrors + engine.busyErrors + runBusy;
  const unfinished = runsNow.filter((r) => !FINAL.has(r.status)).length;
  const fig: ConcurrencyFigure = {
    machine,
    loadAverageAfter: os.loadavg() as [number, number, number],
    seconds,
    wallSeconds,
    commandLine,
    watcher: watcherFig,
    controlRoom,
    engineProcesses: engine,
    runs: { started: runsNow.length, byDoor, byStatus, unfinished, busyErrors: runBusy },
    logLines,
    busyErrors,
    integrity,
    auditChain,
  };
  fs.mkdirSync(path.dirname(out), { recursive: true });
  fs.writeFileSync(out, `${JSON.stringify(fig, null, 2)}\n`);

  const row = (who: string, what: string, w: WriterFigure) =>
    `  ${who.padEnd(14)} ${what.padEnd(30)} ${String(w.actions).padStart(6)} ${String(w.ok).padStart(6)} ${String(w.failed).padStart(7)} ${String(w.busyErrors).padStart(6)}`;
  const kinds = Object.entries(controlRoom.byKind)
    .map(([k, v]) => `${k} ${v.ok}${v.failed ? ` (+${v.failed} failed)` : ""}`)
    .join(", ");
  const lines = [
    `concurrency (${seconds} s of new work, ${wallSeconds.toFixed(0)} s until the last command-line run ended, one database; ${formatMachine(machine)}; load average after ${fig.loadAverageAfter.map((x) => x.toFixed(2)).join(" ")}):`,
    `  ${"writer".padEnd(14)} ${"what".padEnd(30)} ${"count".padStart(6)} ${"ok".padStart(6)} ${"failed".padStart(7)} ${"busy".padStart(6)}`,
    row("command line", "processing runs", commandLine),
    row("watcher", `field-check runs (${foldersCopied} folders${watcherFig.skipped ? `, ${watcherFig.skipped} skipped` : ""})`, watcherFig),
    row("control room", "write requests", controlRoom),
    `  ${"".padEnd(14)} (${kinds})`,
    `  engine processes of the reruns: ${engine.logFiles} log files, ${engine.busyErrors} busy`,
    `  runs in the window: ${runsNow.length} (${Object.entries(byDoor).map(([d, n]) => `${d} ${n}`).join(", ")}; ${Object.entries(byStatus).map(([s, n]) => `${s} ${n}`).join(", ")}; ${unfinished} unfinished)`,
    `  busy errors: ${busyErrors}`,
    `  log lines: ${logLines.emitted} emitted by ${logLines.runs} runs, ${logLines.missing} lost (not in step_logs), ${logLines.insertFailed} inserts failed, ${logLines.unreadableLedgerLines} unreadable ledger lines`,
    `  database: integrity_check ${integrity.join("; ")}; audit chain ${auditChain.intact ? `intact (${auditChain.checked} events)` : `NOT intact: ${auditChain.text.trim()}`}`,
    `  figures: ${out}`,
  ];
  for (const f of [...commandLine.failures, ...watcherFig.failures, ...controlRoom.failures]) lines.push(`  failure: ${f}`);
  for (const e of logLines.missingExamples) lines.push(`  lost line: run ${e.runId} step ${e.runStepId ?? "-"} ${e.level} ${e.message}`);
  process.stdout.write(`${lines.join("\n")}\n`);
  const clean =
    busyErrors === 0 && logLines.missing === 0 && logLines.insertFailed === 0 && integrity.join() === "ok" && auditChain.intact && unfinished === 0 && commandLine.failed + watcherFig.failed + controlRoom.failed === 0;
  return clean ? 0 : 1;
}

main().then(
  (code) => process.exit(code),
  (err) => {
    process.stderr.write(`concurrency figure: ${(err as Error).stack ?? err}\n`);
    process.exit(1);
  },
);
