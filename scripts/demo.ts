/**
 * `npm run demo`: the whole job on the embedded default, for a new user.
 *  1. creates/migrates the SQLite database under ./data (or TRACEWRIGHT_DATA_DIR),
 *  2. adds the demo accounts (one per role),
 *  3. generates the invented Quillmoor survey (examples/quillmoor),
 *  4. runs the example pipelines through the command line, then a rerun with a changed filter,
 *  5. builds the control room if needed and serves it on http://127.0.0.1:3000.
 * `--prepare-only` stops after step 4 (browser tests use it with a temporary data folder).
 */
import fs from "node:fs";
import path from "node:path";
import { execa } from "execa";
import { getDb, closeDb } from "../db/client";
import { dataDir, databasePath, projectRoot } from "../db/paths";
import { seedDemoUsers } from "../db/seed";
import { describeSurvey } from "../db/queries/surveys";
import { listRuns } from "../db/queries/runs";

const args = new Set(process.argv.slice(2));
const prepareOnly = args.has("--prepare-only");
const port = Number(process.env.PORT ?? 3000);
const host = "127.0.0.1";
const example = path.join(projectRoot, "examples", "quillmoor");

const say = (s: string) => process.stdout.write(`${s}\n`);
const cli = (argv: string[], env: Record<string, string> = {}) =>
  execa(process.execPath, ["--import", "tsx", path.join(projectRoot, "cli", "index.ts"), ...argv], {
    cwd: projectRoot,
    stdio: "inherit",
    env: { ...process.env, ...env },
    reject: false,
  });

function newestMtime(dir: string): number {
  let newest = 0;
  if (!fs.existsSync(dir)) return 0;
  for (const e of fs.readdirSync(dir, { withFileTypes: true })) {
    if (e.name === "node_modules" || e.name.startsWith(".")) continue;
    const p = path.join(dir, e.name);
    newest = Math.max(newest, e.isDirectory() ? newestMtime(p) : fs.statSync(p).mtimeMs);
  }
  return newest;
}

function buildIsStale(): boolean {
  const buildId = path.join(projectRoot, ".next", "BUILD_ID");
  if (!fs.existsSync(buildId)) return true;
  const built = fs.statSync(buildId).mtimeMs;
  const sources = ["app", "db", "pipeline", "public"].map((d) => newestMtime(path.join(projectRoot, d)));
  for (const f of ["next.config.mjs", "tailwind.config.ts", "postcss.config.mjs", "package-lock.json", "proxy.ts"]) {
    const p = path.join(projectRoot, f);
    if (fs.existsSync(p)) sources.push(fs.statSync(p).mtimeMs);
  }
  return Math.max(...sources) > built;
}

/** The demo alone knows the true onsets: how far the first-arrival picks are from them, and how many are flagged. */
async function assessFirstArrivalPicks(): Promise<void> {
  const r = await execa(process.execPath, ["--import", "tsx", path.join(example, "assess-picks.ts")], { cwd: projectRoot, stdio: "inherit", reject: false });
  if (r.exitCode !== 0) say("  (no first-arrival picks to compare with the true onsets)");
}

async function main() {
  say(`Tracewright demo: data in ${dataDir()}`);
  const db = getDb();
  say(`  database ready: ${databasePath()}`);
  const accounts = seedDemoUsers(db);
  closeDb();

  // The survey's files are generated data: they live under the data folder, not in the source tree.
  const fieldDir = path.join(dataDir(), "examples", "quillmoor", "field");
  if (!fs.existsSync(path.join(fieldDir, "qm1-geometry.csv"))) {
    say(`  generating the Quillmoor example survey (line QM-1) into ${fieldDir}...`);
    const r = await execa(process.execPath, ["--import", "tsx", path.join(example, "make-field-data.ts"), fieldDir], { cwd: projectRoot, stdio: "inherit", reject: false });
    if (r.exitCode !== 0) throw new Error("generating the example survey failed");
  }

  const processor = accounts.find((a) => a.role === "processor")?.email;
  const lead = accounts.find((a) => a.role === "lead")?.email;
  // Processing first; the modelling pipeline then takes its processing steps from the cache.
  const order = ["qm1-processing.yaml", "qm1-modelling.yaml", "qm1-inversion.yaml"];
  const pipelines = [
    ...order.filter((f) => fs.existsSync(path.join(example, f))),
    ...fs
      .readdirSync(example)
      .filter((f) => f.endsWith(".yaml") && !order.includes(f))
      .sort(),
  ];
  for (const file of pipelines) {
    say(`\n  running ${path.join("examples", "quillmoor", file)} through the command line as ${processor}`);
    const r = await cli(["run", path.join(example, file), "--field-data", fieldDir, ...(processor ? ["--as", processor] : [])]);
    if (r.exitCode !== 0) throw new Error(`the example pipeline ${file} failed (exit ${r.exitCode})`);
  }

  // The demo alone knows the true ground: say how close the inverted model comes to it.
  const assessed = await execa(process.execPath, ["--import", "tsx", path.join(example, "assess-inversion.ts")], { cwd: projectRoot, stdio: "inherit", reject: false });
  if (assessed.exitCode !== 0) say("  (no inverted model to compare with the true ground)");

  await assessFirstArrivalPicks();

  // The team's everyday move: change one filter corner and rerun; upstream steps come from the cache.
  const db2 = getDb();
  describeSurvey(db2, "quillmoor", {
    name: "Quillmoor playing field",
    site: "Quillmoor, Brennick Vale",
    client: "Quillmoor Education Trust",
    description: "Search for an infilled solution hollow before a school extension (invented demo scenario).",
  });
  const last = listRuns(db2, { pipelineName: "quillmoor-qm1-processing", pageSize: 1 }).rows[0];
  closeDb();
  const processing = fs.readFileSync(path.join(example, "qm1-processing.yaml"), "utf8");
  if (last && /step:\s*frequency-filter/.test(processing)) {
    say(`\n  rerunning run ${last.id} with the band-pass high corner at 120 Hz, as ${lead}`);
    const r = await cli(["rerun", String(last.id), "--from", "frequency-filter", "--set", "frequency-filter.highCutHz=120", ...(lead ? ["--as", lead] : [])]);
    if (r.exitCode !== 0) throw new Error(`the rerun failed (exit ${r.exitCode})`);
  }

  say("\nDemo accounts (invented people; demo passwords):");
  for (const a of accounts) say(`  ${a.role.padEnd(10)} ${a.email.padEnd(34)} ${a.password.padEnd(26)} ${a.name}`);

  if (prepareOnly) return;

  if (buildIsStale()) {
    say("\n  building the control room (next build)...");
    const b = await execa(path.join(projectRoot, "node_modules", ".bin", "next"), ["build"], {
      cwd: projectRoot,
      stdio: "inherit",
      env: { ...process.env, NEXT_TELEMETRY_DISABLED: "1" },
      reject: false,
    });
    if (b.exitCode !== 0) throw new Error("next build failed");
  }
  const origin = `http://${host}:${port}`;
  say(`\nControl room: ${origin}  (Ctrl-C to stop)`);
  const server = execa(path.join(projectRoot, "node_modules", ".bin", "next"), ["start", "-H", host, "-p", String(port)], {
    cwd: projectRoot,
    stdio: "inherit",
    env: { ...process.env, NEXTAUTH_URL: process.env.NEXTAUTH_URL ?? origin, NEXT_TELEMETRY_DISABLED: "1" },
    reject: false,
  });
  const stop = () => server.kill("SIGTERM");
  process.on("SIGINT", stop);
  process.on("SIGTERM", stop);
  await server;
}

main().catch((err) => {
  process.stderr.write(`demo: ${(err as Error).message}\n`);
  process.exit(1);
});
