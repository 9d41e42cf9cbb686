/**
 * Crash safety of the engine, measured: runs a pipeline through the command line, kills the CLI
 * process with SIGKILL at N seeded random moments (one fresh data folder per trial), then checks
 *   1. the database (SQLite `PRAGMA integrity_check`),
 *   2. every artifact file against its name (SHA-256 of its bytes) and that every recorded
 *      artifact exists, counting temporary files left behind,
 *   3. that `tracewright resume` finishes the run,
 *   4. that the final artifacts of every step equal those of an uninterrupted run.
 *
 *   npx tsx scripts/crash-safety.ts --field-data <folder> [--pipeline examples/quillmoor/qm1-modelling.yaml]
 *                                   [--trials 5] [--seed 20261202] [--work /tmp/crash-safety] [--json]
 *
 * Prepare the field data first, e.g. `cp -a /work/demo-data /tmp/leftovers-data` and pass
 * `--field-data /tmp/leftovers-data/examples/quillmoor/field`. Each trial starts from an empty
 * data folder so every step computes (a warm cache would finish before any kill). Kill moments are
 * uniform between 5 % and 95 % of the uninterrupted run's duration (shortened to the duration of
 * any trial that finished before its kill).
 */
import fs from "node:fs";
import path from "node:path";
import { execa } from "execa";
import { closeDb, openDatabase } from "../db/client";
import { databaseIntegrity, listRecordedArtifacts } from "../db/queries/artifacts";
import { getRun, listRuns } from "../db/queries/runs";
import { sha256Hex } from "../pipeline/hash";
import { mulberry32 } from "../pipeline/kernels/random";
import { projectRoot } from "../db/paths";

interface TrialResult {
  trial: number;
  killAtMs: number;
  /** "mid-run": killed while the run was executing; "before-run": before the run was recorded; "after-run": it had finished. */
  killed: "mid-run" | "before-run" | "after-run";
  stepsDoneAtKill: number;
  integrity: string;
  artifactFiles: number;
  badArtifactFiles: number;
  missingRecordedArtifacts: number;
  temporaryFiles: number;
  resumed: "succeeded" | "failed" | "not needed";
  finalMatches: boolean;
  mismatchedSteps: string[];
}

function argValue(args: string[], name: string, fallback?: string): string | undefined {
  const i = args.indexOf(name);
  return i >= 0 && i + 1 < args.length ? args[i + 1] : fallback;
}

const cliPath = path.join(projectRoot, "cli", "index.ts");
const cli = (dataDir: string, argv: string[]) =>
  execa(process.execPath, ["--import", "tsx", cliPath, ...argv], {
    cwd: projectRoot,
    env: { ...process.env, TRACEWRIGHT_DATA_DIR: dataDir, TRACEWRIGHT_DB: path.join(dataDir, "tracewright.db") },
    reject: false,
  });

/** Step label → output hashes of the latest run in a data folder, with the run's id and status. */
function finalOutputs(dataDir: string): { runId: number | null; status: string | null; stepsDone: number; outputs: Record<string, Record<string, string>> } {
  const file = path.join(dataDir, "tracewright.db");
  if (!fs.existsSync(file)) return { runId: null, status: null, stepsDone: 0, outputs: {} };
  const db = openDatabase(file);
  try {
    const latest = listRuns(db, { pageSize: 1 }).rows[0];
    if (!latest) return { runId: null, status: null, stepsDone: 0, outputs: {} };
    const run = getRun(db, latest.id)!;
    const outputs: Record<string, Record<string, string>> = {};
    for (const s of run.steps) outputs[s.label] = s.outputs;
    return { runId: run.id, status: run.status, stepsDone: run.steps.filter((s) => s.status === "succeeded").length, outputs };
  } finally {
    db.$client.close();
  }
}

/** Database check and artifact re-hash of a data folder after a kill. */
function inspect(dataDir: string): Pick<TrialResult, "integrity" | "artifactFiles" | "badArtifactFiles" | "missingRecordedArtifacts" | "temporaryFiles"> {
  const file = path.join(dataDir, "tracewright.db");
  let integrity = "no database yet";
  let recorded: Array<{ hash: string; path: string }> = [];
  if (fs.existsSync(file)) {
    const db = openDatabase(file);
    try {
      integrity = databaseIntegrity(db).join("; ");
      recorded = listRecordedArtifacts(db);
    } finally {
      db.$client.close();
    }
  }
  let artifactFiles = 0;
  let badArtifactFiles = 0;
  let temporaryFiles = 0;
  const root = path.join(dataDir, "artifacts");
  if (fs.existsSync(root)) {
    for (const dir of fs.readdirSync(root)) {
      const sub = path.join(root, dir);
      if (!fs.statSync(sub).isDirectory()) continue;
      for (const name of fs.readdirSync(sub)) {
        if (name.endsWith(".tmp")) {
          temporaryFiles++;
          continue;
        }
        const m = /^([0-9a-f]{64})\.twa$/.exec(name);
        if (!m) continue;
        artifactFiles++;
        if (sha256Hex(fs.readFileSync(path.join(sub, name))) !== m[1]) badArtifactFiles++;
      }
    }
  }
  const missingRecordedArtifacts = recorded.filter((a) => !fs.existsSync(path.join(dataDir, a.path))).length;
  return { integrity, artifactFiles, badArtifactFiles, missingRecordedArtifacts, temporaryFiles };
}

async function main() {
  const args = process.argv.slice(2);
  const fieldData = argValue(args, "--field-data");
  if (!fieldData || !fs.existsSync(fieldData)) {
    process.stderr.write("crash-safety: give --field-data <folder> (e.g. a copy of /work/demo-data/examples/quillmoor/field)\n");
    process.exit(2);
  }
  const pipeline = path.resolve(argValue(args, "--pipeline", path.join(projectRoot, "examples", "quillmoor", "qm1-modelling.yaml"))!);
  const trials = Number(argValue(args, "--trials", "5"));
  const seed = Number(argValue(args, "--seed", "20261202"));
  const work = path.resolve(argValue(args, "--work", "/tmp/crash-safety")!);
  const json = args.includes("--json");
  const say = (s: string) => {
    if (!json) process.stdout.write(`${s}\n`);
  };
  fs.rmSync(work, { recursive: true, force: true });
  fs.mkdirSync(work, { recursive: true });

  // The uninterrupted reference run.
  const refDir = path.join(work, "reference");
  say(`reference: ${path.relative(projectRoot, pipeline)} on ${fieldData}, uninterrupted`);
  const started = Date.now();
  const ref = await cli(refDir, ["run", pipeline, "--field-data", fieldData]);
  const durationMs = Date.now() - started;
  const reference = finalOutputs(refDir);
  if (ref.exitCode !== 0 || reference.status !== "succeeded") {
    process.stderr.write(`crash-safety: the reference run failed (exit ${ref.exitCode}):\n${ref.stderr}\n`);
    process.exit(1);
  }
  say(`reference: ${Object.keys(reference.outputs).length} steps in ${(durationMs / 1000).toFixed(1)} s`);

  const u = mulberry32(seed);
  // The load of a shared machine changes: a trial that finished before its kill shortens the
  // estimate of a run's duration that later kill moments are drawn in.
  let estimateMs = durationMs;
  const results: TrialResult[] = [];
  for (let t = 1; t <= trials; t++) {
    const dir = path.join(work, `trial-${String(t).padStart(2, "0")}`);
    const killAtMs = Math.round((0.05 + 0.9 * u()) * estimateMs);
    const child = execa(process.execPath, ["--import", "tsx", cliPath, "run", pipeline, "--field-data", fieldData], {
      cwd: projectRoot,
      env: { ...process.env, TRACEWRIGHT_DATA_DIR: dir, TRACEWRIGHT_DB: path.join(dir, "tracewright.db") },
      reject: false,
    });
    const timer = setTimeout(() => child.kill("SIGKILL"), killAtMs);
    const trialStart = Date.now();
    const exit = await child;
    clearTimeout(timer);
    if (exit.signal !== "SIGKILL") estimateMs = Math.min(estimateMs, Date.now() - trialStart);
    const atKill = finalOutputs(dir);
    const killed: TrialResult["killed"] = exit.signal !== "SIGKILL" ? "after-run" : atKill.runId === null ? "before-run" : "mid-run";
    const checked = inspect(dir);
    let resumed: TrialResult["resumed"] = "not needed";
    if (killed === "mid-run") {
      const r = await cli(dir, ["resume", String(atKill.runId)]);
      resumed = r.exitCode === 0 ? "succeeded" : "failed";
    } else if (killed === "before-run") {
      const r = await cli(dir, ["run", pipeline, "--field-data", fieldData]);
      resumed = r.exitCode === 0 ? "succeeded" : "failed";
    }
    const final = finalOutputs(dir);
    const mismatchedSteps = Object.keys(reference.outputs).filter((label) => JSON.stringify(final.outputs[label] ?? null) !== JSON.stringify(reference.outputs[label]));
    const result: TrialResult = {
      trial: t,
      killAtMs,
      killed,
      stepsDoneAtKill: atKill.stepsDone,
      ...checked,
      resumed,
      finalMatches: final.status === "succeeded" && mismatchedSteps.length === 0,
      mismatchedSteps,
    };
    results.push(result);
    say(
      `trial ${t}: SIGKILL at ${(killAtMs / 1000).toFixed(1)} s (${killed}, ${result.stepsDoneAtKill} steps done); integrity ${result.integrity}; ` +
        `${result.artifactFiles} artifact files, ${result.badArtifactFiles} bad, ${result.missingRecordedArtifacts} recorded but missing, ${result.temporaryFiles} temporary; ` +
        `resume ${resumed}; final artifacts ${result.finalMatches ? "equal the reference" : `differ (${mismatchedSteps.join(", ") || final.status})`}`,
    );
    fs.rmSync(dir, { recursive: true, force: true });
  }
  const count = (f: (r: TrialResult) => boolean) => results.filter(f).length;
  const summary = {
    pipeline: path.relative(projectRoot, pipeline),
    trials,
    seed,
    referenceSeconds: durationMs / 1000,
    killedMidRun: count((r) => r.killed === "mid-run"),
    killedBeforeRun: count((r) => r.killed === "before-run"),
    finishedBeforeKill: count((r) => r.killed === "after-run"),
    integrityOk: count((r) => r.integrity === "ok" || r.integrity === "no database yet"),
    badArtifactFiles: results.reduce((s, r) => s + r.badArtifactFiles, 0),
    missingRecordedArtifacts: results.reduce((s, r) => s + r.missingRecordedArtifacts, 0),
    temporaryFilesLeft: results.reduce((s, r) => s + r.temporaryFiles, 0),
    resumesSucceeded: count((r) => r.resumed === "succeeded"),
    resumesFailed: count((r) => r.resumed === "failed"),
    finalEqualsReference: count((r) => r.finalMatches),
  };
  if (json) process.stdout.write(`${JSON.stringify({ summary, results }, null, 2)}\n`);
  else {
    say("");
    say(
      `${trials} kills (${summary.killedMidRun} mid-run, ${summary.killedBeforeRun} before the run was recorded, ${summary.finishedBeforeKill} after it finished): ` +
        `database sound ${summary.integrityOk}/${trials}; bad artifact files ${summary.badArtifactFiles}; recorded but missing ${summary.missingRecordedArtifacts}; ` +
        `temporary files left ${summary.temporaryFilesLeft}; resumes ${summary.resumesSucceeded} succeeded, ${summary.resumesFailed} failed; ` +
        `final artifacts equal to the uninterrupted run ${summary.finalEqualsReference}/${trials}`,
    );
  }
  closeDb();
  fs.rmSync(refDir, { recursive: true, force: true });
  const sound = summary.integrityOk === trials && summary.badArtifactFiles === 0 && summary.missingRecordedArtifacts === 0 && summary.resumesFailed === 0 && summary.finalEqualsReference === trials;
  process.exitCode = sound ? 0 : 1;
}

main().catch((err) => {
  process.stderr.write(`crash-safety: ${(err as Error).message}\n`);
  process.exit(1);
});
