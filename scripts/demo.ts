/**
 * `npm run demo`: the whole job on the embedded default, for a new user.
 *  1. creates/migrates the SQLite database under ./data (or TRACEWRIGHT_DATA_DIR),
 *  2. adds the demo accounts (one per role),
 *  3. generates the invented Quillmoor survey (examples/quillmoor),
 *  4. runs the example pipelines through the command line, then reruns with two first-arrival
 *     picks edited by hand and with a changed filter,
 *     then the lead approves the inversion and makes the client report (data/reports/),
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
import { getRun, listRuns } from "../db/queries/runs";
import { writeTransaction } from "../db/client";
import { recordAudit } from "../db/queries/audit";
import { addReviewOnce, latestDecision } from "../db/queries/review-decisions";
import { getUserByEmail } from "../db/queries/users";
import { readArtifactSync } from "../pipeline/artifact-store";
import { recordInterpretation } from "../pipeline/report/interpretation";
import type { ElasticModel, GatherSet, PickSet } from "../pipeline/types";
import { trueOnsets } from "../examples/quillmoor/assess-picks";
import { addProfile, createSurvey, getProfile, getSurveyBySlug, setSurveyPerson, updateSurvey } from "../db/queries/surveys";
import { profileFields, newSurvey } from "../db/survey-fields";
import type { Db } from "../db/client";
import type net from "node:net";
import { SMTPServer } from "smtp-server";
import { ensureSurvey } from "../db/queries/surveys";
import { admitFile, checkArrivedFile, completeUpload, openUpload, transfersDir, uploadLimits } from "../pipeline/uploads";
import { latestFieldChecks } from "../db/queries/field-checks";
import type { FieldCheckReport } from "../pipeline/steps/field-check";
import type { JsonDocument } from "../pipeline/types";
import { redisServerAvailable, spawnWorkerProcess, startLocalRedis } from "../pipeline/workers/local-queue";
import { localContentFile } from "../pipeline/field-file-store";
import { startLocalS3 } from "./local-s3";

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

/**
 * Reproducibility and the audit trail's proof: the auditor has the processing run executed again
 * without the cache and every artifact compared (cheap; the inversion is not reproduced here, it
 * takes as long as the first time), then checks the audit trail's hash chain.
 */
async function reproduceAndVerifyAudit(auditor: string | undefined) {
  const db = getDb();
  const processing = listRuns(db, { pipelineName: "quillmoor-qm1-processing", status: "succeeded", pageSize: 100 }).rows.at(-1);
  closeDb();
  if (processing) {
    say(`\n  reproducing processing run ${processing.id} from its recorded inputs, without the cache, as ${auditor}`);
    const r = await cli(["reproduce", String(processing.id), ...(auditor ? ["--as", auditor] : [])]);
    say(`  reproduce exit code ${r.exitCode} (${r.exitCode === 0 ? "confirmed" : "NOT confirmed"})`);
  }
  say("\n  checking the audit trail's hash chain");
  const v = await cli(["audit", "verify"]);
  say(`  audit verify exit code ${v.exitCode} (${v.exitCode === 0 ? "intact" : "BROKEN"})`);
}

/**
 * What leaves the office: the lead approves the inversion run, writes the interpretation (read
 * off the inverted model: where the slowest ground near the surface lies) and makes the client
 * report through the command line, which prints its page count and generation time.
 */
async function reportOnApprovedInversion(leadEmail: string | undefined): Promise<void> {
  const db = getDb();
  const run = listRuns(db, { pipelineName: "quillmoor-qm1-inversion", status: "succeeded", pageSize: 1 }).rows[0];
  const lead = leadEmail ? getUserByEmail(db, leadEmail) : null;
  if (!run || !lead) {
    closeDb();
    say("  (no finished inversion run or no lead: no client report)");
    return;
  }
  const actor = { userId: lead.id, label: lead.name, door: "cli" as const };
  if (latestDecision(db, run.id)?.decision !== "approved") {
    writeTransaction(db, (tx) => {
      addReviewOnce(tx, { runId: run.id, reviewerUserId: lead.id, decision: "approved", comment: "Fit and model checked against the probe; approved for the client report." });
      recordAudit(tx, { actor, action: "review.approve", entityType: "run", entityId: run.id, after: { decision: "approved" } });
    });
  }
  // The slowest column of the top 4 m of the inverted model, as the lead reads it off the section.
  const inversion = getRun(db, run.id)!.steps.find((s) => s.stepId === "waveform-inversion")!;
  const m = readArtifactSync(inversion.outputs.model) as ElasticModel;
  const rows = Math.min(m.nz, Math.round(4 / m.spacingM));
  let slowX = m.originX;
  let slowVs = Infinity;
  for (let ix = 0; ix < m.nx; ix++) {
    let sum = 0;
    for (let iz = 0; iz < rows; iz++) sum += m.vs[iz * m.nx + ix];
    if (sum / rows < slowVs) [slowVs, slowX] = [sum / rows, m.originX + ix * m.spacingM];
  }
  // Away from the slow zone: Vs near the surface and at the bottom of the grid, a quarter along.
  const ix = Math.round(((slowX - m.originX) / m.spacingM + m.nx / 4) % m.nx);
  const topVs = m.vs[ix];
  const bottomVs = m.vs[(m.nz - 1) * m.nx + ix];
  const bottomM = m.originZ + (m.nz - 1) * m.spacingM;
  const stages = ((readArtifactSync(inversion.outputs.report) as { data: { stages: Array<{ startMisfit: number; endMisfit: number }> } }).data.stages ?? []).map(
    (st) => Math.round(100 * (1 - st.endMisfit / st.startMisfit)),
  );
  recordInterpretation(
    db,
    run.id,
    {
      summary:
        `The inverted model of line QM-1 shows a zone of low shear-wave velocity centred near ${slowX.toFixed(0)} m along the profile, ` +
        `averaging about ${Math.round(slowVs)} m/s over the top 4 m, slower than the ground on either side. It is consistent with an infilled solution hollow.`,
      model: `Away from that zone, at ${(m.originX + ix * m.spacingM).toFixed(0)} m, Vs rises from about ${Math.round(topVs)} m/s at the surface to about ${Math.round(bottomVs)} m/s at ${bottomM.toFixed(0)} m depth.`,
      "data-fit": `The misfit fell within each of the ${stages.length} frequency stages, by ${stages.join(", ")} % in turn; compare the observed and synthetic waveforms of the shots shown.`,
      recommendations: `Confirm the extent and depth of the low-velocity zone with a probe or a borehole near ${slowX.toFixed(0)} m before the foundations are designed.`,
    },
    actor,
  );
  closeDb();
  const out = path.join(dataDir(), "reports", `quillmoor-qm1-run-${run.id}.pdf`);
  fs.mkdirSync(path.dirname(out), { recursive: true });
  say(`\n  the lead approves run ${run.id}, writes the interpretation and makes the client report`);
  const positions = [0.3, 0.5, 0.7].map((f) => Math.round(m.originX + f * (m.nx - 1) * m.spacingM));
  positions[1] = Math.round(slowX);
  // The firm on the title page: the scenario's consultancy, unless the environment names another.
  const r = await cli(["report", String(run.id), "--out", out, "--force", "--positions", positions.join(","), "--as", lead.email], {
    TRACEWRIGHT_FIRM: process.env.TRACEWRIGHT_FIRM ?? "Corvell Ground Imaging",
  });
  if (r.exitCode !== 0) throw new Error(`the client report failed (exit ${r.exitCode})`);
}

/**
 * The Quillmoor survey as a record (client, site, purpose, dates, the crew on it) with line QM-1's
 * spread and end coordinates, made before the pipelines run so their notices reach the survey's
 * lead; and, unless TRACEWRIGHT_SMTP_HOST names a real relay, a local fake SMTP server that accepts
 * every message, so the command line and the control room send their notices and the Outbox page
 * shows what was sent. The coordinates are invented (British National Grid, EPSG:27700), 47 m
 * along a bearing of 75°.
 */
async function quillmoorSurveyRecordAndMailCatcher(db: Db): Promise<void> {
  const demoActor = { userId: null, label: "demo set-up", door: "cli" as const };
  const details = newSurvey.parse({
    slug: "quillmoor",
    name: "Quillmoor playing field",
    client: "Quillmoor Education Trust",
    site: "Quillmoor, Brennick Vale",
    purpose: "Find an infilled solution hollow (position, width, depth) before a school extension is built on the playing field.",
    startDate: "2026-11-17",
    endDate: "2026-11-18",
    notes: "Old estate maps hint at a pond filled with loose rubble and ash. Crew: Rosa Okafor-Lind (field lead), Tam Whitcombe (assistant). Invented demo scenario.",
  });
  // A data folder from an earlier demo may hold the survey as a pipeline file created it (a bare name).
  if (getSurveyBySlug(db, "quillmoor")) updateSurvey(db, "quillmoor", details, demoActor);
  else createSurvey(db, details, demoActor);
  const survey = getSurveyBySlug(db, "quillmoor")!;
  if (!getProfile(db, survey.id, "QM-1")) {
    addProfile(
      db,
      "quillmoor",
      profileFields.parse({
        name: "QM-1",
        description: "Across the suspected hollow; sledgehammer on a steel plate every 2 m from x = -1 m to 49 m, 4 blows per source point.",
        orientationDeg: 75,
        spreadDescription: "48 vertical 4.5 Hz geophones at 1.0 m, first at x = 0 m",
        crs: "EPSG:27700",
        startX: 412350.0,
        startY: 287640.0,
        endX: 412395.4,
        endY: 287652.17,
      }),
      demoActor,
    );
  }
  for (const [email, role] of [
    ["rosa.okafor-lind@corvell.example", "lead"],
    ["tam.whitcombe@corvell.example", "processor"],
  ] as const) {
    const person = getUserByEmail(db, email);
    if (person) setSurveyPerson(db, "quillmoor", person.id, role, demoActor);
  }
  say("  survey record: Quillmoor playing field, line QM-1 (EPSG:27700), Rosa Okafor-Lind lead, Tam Whitcombe processor");

  if (process.env.TRACEWRIGHT_SMTP_HOST) {
    say(`  mail notices go to ${process.env.TRACEWRIGHT_SMTP_HOST}:${process.env.TRACEWRIGHT_SMTP_PORT ?? 25}`);
    return;
  }
  let caught = 0;
  const catcher = new SMTPServer({
    authOptional: true,
    disabledCommands: ["STARTTLS"],
    logger: false,
    onData(stream, _session, callback) {
      stream.on("data", () => undefined);
      stream.on("end", () => {
        caught++;
        callback();
      });
    },
  });
  await new Promise<void>((resolve) => catcher.listen(0, "127.0.0.1", () => resolve()));
  // Does not keep the demo alive by itself: it stops with the control room (or after --prepare-only).
  catcher.server.unref();
  const port = (catcher.server.address() as net.AddressInfo).port;
  process.env.TRACEWRIGHT_SMTP_HOST = "127.0.0.1";
  process.env.TRACEWRIGHT_SMTP_PORT = String(port);
  process.on("exit", () => {
    if (caught) process.stdout.write(`  the demo's mail catcher accepted ${caught} message(s); read them on the Outbox page\n`);
  });
  say(`  fake mail server (accepts every message, delivers none) on 127.0.0.1:${port}: notices appear on the Outbox page`);
}

/**
 * Field checks on arrival: the check the folder watcher runs on the crew's laptop, here on the
 * survey's field folder through the command line; prints what it found and its time per record.
 */
async function demoFieldCheck(fieldDir: string, processor: string | undefined): Promise<void> {
  say(`\n  field check of the raw blows in ${fieldDir} (examples/quillmoor/qm1-field-check.yaml)`);
  const r = await cli(["run", path.join(example, "qm1-field-check.yaml"), "--field-data", fieldDir, ...(processor ? ["--as", processor] : [])]);
  if (r.exitCode !== 0) throw new Error(`the field check failed (exit ${r.exitCode})`);
  const db = getDb();
  const check = latestFieldChecks(db).find((c) => path.resolve(c.folderPath) === path.resolve(fieldDir));
  closeDb();
  if (!check?.reportHash) return;
  const report = (readArtifactSync(check.reportHash) as JsonDocument).data as FieldCheckReport;
  say(`  field check, run ${check.runId}: ${report.counts.shots} records, verdict ${report.verdict}, ${check.summary?.msPerRecord ?? "?"} ms per record`);
  for (const f of report.findings) say(`    [${f.verdict}] ${f.message}`);
  say(`  (the page: /field-checks/${check.runId}; the watcher mails the field lead: tracewright watch <folder> --pipeline examples/quillmoor/qm1-field-check.yaml --mail-field-lead <email>)`);
}

/** The demo alone knows the true onsets: how far the first-arrival picks are from them, and how many are flagged. */
async function assessFirstArrivalPicks(): Promise<void> {
  const r = await execa(process.execPath, ["--import", "tsx", path.join(example, "assess-picks.ts")], { cwd: projectRoot, stdio: "inherit", reject: false });
  if (r.exitCode !== 0) say("  (no first-arrival picks to compare with the true onsets)");
}

/**
 * Hand edits of first-arrival picks from the command line, as the control room's pick editor
 * saves them: the two flagged picks of the model-from-data run farthest from the true onsets
 * (only the demo knows them), the worst moved onto its true onset and the next deleted, written
 * to a settings file and given to `tracewright rerun --from first-arrivals --set
 * first-arrivals.pickEdits=...`; prints the changed picks and the tomography's fit before and after.
 */
async function editFirstArrivalPicksByHand(processorEmail: string | undefined): Promise<void> {
  const db = getDb();
  const latest = listRuns(db, { pipelineName: "quillmoor-qm1-model-from-data", status: "succeeded", pageSize: 1 }).rows[0];
  const run = latest ? getRun(db, latest.id) : null;
  closeDb();
  const step = run?.steps.find((s) => s.stepId === "first-arrivals" && s.status === "succeeded");
  if (!run || !step?.outputs.picks || !step.inputs.gathers) {
    say("  (no model-from-data run with first-arrival picks to edit by hand)");
    return;
  }
  const picks = readArtifactSync(step.outputs.picks) as PickSet;
  const gathers = readArtifactSync(step.inputs.gathers) as GatherSet;
  const byId = new Map(gathers.gathers.map((g) => [g.id, g]));
  const flagged = picks.picks.filter((p) => p.flagged).map((p) => ({ p, h: byId.get(p.gatherId)!.traces[p.traceIndex] }));
  if (flagged.length < 2) {
    say("  (fewer than two flagged picks: nothing to correct by hand)");
    return;
  }
  const onsets = trueOnsets(flagged.map((f) => ({ sourceX: f.h.sourceX, receiverX: f.h.receiverX })));
  const worst = flagged.map((f, i) => ({ ...f, onsetS: onsets[i], errorMs: 1000 * (f.p.timeS - onsets[i]) })).sort((a, b) => Math.abs(b.errorMs) - Math.abs(a.errorMs));
  const [move, drop] = worst;
  const edits = [
    { gather: move.p.gatherId, channel: move.h.channel, action: "moved", timeMs: Math.round(move.onsetS * 1e5) / 100 },
    { gather: drop.p.gatherId, channel: drop.h.channel, action: "deleted", timeMs: null },
  ];
  const file = path.join(dataDir(), "examples", "quillmoor", "pick-edits.json");
  fs.mkdirSync(path.dirname(file), { recursive: true });
  fs.writeFileSync(file, JSON.stringify(edits, null, 2) + "\n");
  say(`\n  editing two first-arrival picks of run ${run.id} by hand (settings file ${path.relative(projectRoot, file)}), as ${processorEmail}`);
  const r = await cli(["rerun", String(run.id), "--from", step.label, "--set", `${step.label}.pickEdits=${fs.readFileSync(file, "utf8")}`, ...(processorEmail ? ["--as", processorEmail] : [])]);
  if (r.exitCode !== 0) throw new Error(`the rerun with hand-edited picks failed (exit ${r.exitCode})`);
  const db2 = getDb();
  const edited = getRun(db2, listRuns(db2, { pipelineName: "quillmoor-qm1-model-from-data", pageSize: 1 }).rows[0].id)!;
  closeDb();
  const newPicks = readArtifactSync(edited.steps.find((s) => s.label === step.label)!.outputs.picks) as PickSet;
  for (const [e, w] of [[edits[0], move], [edits[1], drop]] as const) {
    const now = newPicks.picks.find((p) => p.gatherId === w.p.gatherId && p.traceIndex === w.p.traceIndex);
    const after = now ? `${(now.timeS * 1000).toFixed(2)} ms (${now.origin ?? "automatic"}, error ${(1000 * (now.timeS - w.onsetS)).toFixed(2)} ms)` : "no pick";
    say(`    ${w.p.gatherId} channel ${w.h.channel} (offset ${w.h.offset.toFixed(1)} m), ${e.action}: ${(w.p.timeS * 1000).toFixed(2)} ms (flagged, error ${w.errorMs.toFixed(2)} ms against the true onset) → ${after}`);
  }
  // Flagged picks are left out of the tomography; the hand pick is not flagged, so it counts now.
  const fit = (d: typeof run) => d.steps.find((s) => s.stepId === "first-arrival-tomography")?.summary as { finalRmsMs?: number; picks?: number } | null | undefined;
  const [before, after] = [fit(run), fit(edited)];
  if (before?.finalRmsMs !== undefined && after?.finalRmsMs !== undefined) {
    say(`    tomography: run ${run.id} ${before.picks} picks used, rms residual ${before.finalRmsMs.toFixed(3)} ms → run ${edited.id} ${after.picks} picks, ${after.finalRmsMs.toFixed(3)} ms`);
  }
  say(`    (in the control room: /runs/${edited.id}, step ${step.label}, "Edit picks by hand…")`);
}

async function main() {
  say(`Tracewright demo: data in ${dataDir()}`);
  const db = getDb();
  say(`  database ready: ${databasePath()}`);
  const accounts = seedDemoUsers(db);
  await quillmoorSurveyRecordAndMailCatcher(db);
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

  await demoFieldCheck(fieldDir, processor);

  // The demo alone knows the true ground: say how close the inverted model comes to it.
  const assessed = await execa(process.execPath, ["--import", "tsx", path.join(example, "assess-inversion.ts")], { cwd: projectRoot, stdio: "inherit", reject: false });
  if (assessed.exitCode !== 0) say("  (no inverted model to compare with the true ground)");

  await assessFirstArrivalPicks();
  await editFirstArrivalPicksByHand(processor);

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

  await reproduceAndVerifyAudit(accounts.find((a) => a.role === "auditor")?.email);
  await reportOnApprovedInversion(lead);
  await demoUploadFromTheField(fieldDir, processor);
  await demoShotQueue(lead);

  say("\nDemo accounts (invented people; demo passwords):");
  for (const a of accounts) say(`  ${a.role.padEnd(10)} ${a.email.padEnd(34)} ${a.password.padEnd(26)} ${a.name}`);

  if (prepareOnly) return;
  await demoObjectStore(fieldDir, processor);

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
  showPipelinePages(origin);
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

/** Where the pipelines are edited: the list, each pipeline's versions and differences, the editor (processors and leads). */
function showPipelinePages(origin: string) {
  say(`  Pipelines (versions, who saved each, differences, pipeline files; the editor for processors and leads): ${origin}/pipelines`);
}

/**
 * Uploads from the field: the crew's folder sent as the upload page sends it, through the same
 * code the transfer route calls once a file has arrived (admission with the size limits, checks on
 * arrival with the engine's readers, completion into a dataset, the profile's pipeline queued),
 * without the HTTP layer. One copy of a record is sent twice under another name and one record is
 * cut short, so the upload shows a duplicate and a refusal. The queued run is executed by the
 * engine as the control room would (every step comes from the cache: same content as the folder).
 */
async function demoUploadFromTheField(fieldDir: string, processorEmail: string | undefined) {
  const db = getDb();
  const user = processorEmail ? getUserByEmail(db, processorEmail) : null;
  const actor = { userId: user?.id ?? null, label: user?.name ?? "field crew", door: "web" as const };
  const profile = ensureSurvey(db, "quillmoor", "QM-1").profile!;
  const session = openUpload(db, profile.id, actor);
  const limits = uploadLimits();
  fs.mkdirSync(transfersDir(), { recursive: true });
  const files = fs.readdirSync(fieldDir).sort().map((name) => ({ name, bytes: fs.readFileSync(path.join(fieldDir, name)) }));
  const first = files.find((f) => f.name.endsWith(".sg2"));
  if (first) {
    files.push({ name: first.name.replace(/\.sg2$/, " (copy).sg2"), bytes: first.bytes });
    files.push({ name: "sp99-b1.sg2", bytes: first.bytes.subarray(0, Math.floor(first.bytes.length / 2)) });
  }
  const verdicts: Record<string, number> = {};
  for (const [i, f] of files.entries()) {
    const transferId = `demo-${session.id}-${i}`;
    admitFile(db, { sessionId: session.id, transferId, name: f.name, sizeBytes: f.bytes.length, limits });
    fs.writeFileSync(path.join(transfersDir(), transferId), f.bytes);
    const checked = await checkArrivedFile(db, transferId, path.join(transfersDir(), transferId));
    verdicts[checked.verdict] = (verdicts[checked.verdict] ?? 0) + 1;
    if (checked.verdict !== "accepted") say(`    ${checked.verdict}: ${checked.message}`);
  }
  const done = await completeUpload(db, session.id, actor);
  closeDb();
  say(`\n  upload ${session.id} to quillmoor QM-1: ${Object.entries(verdicts).map(([v, n]) => `${n} ${v}`).join(", ")}; dataset ${done.datasetId}`);
  if (done.runId !== null) {
    say(`  run ${done.runId} queued with ${done.pipeline?.name} v${done.pipeline?.version}; executing it`);
    const r = await cli(["execute-run", String(done.runId)]);
    if (r.exitCode !== 0) throw new Error(`the run of the upload failed (exit ${r.exitCode})`);
  }
  say(`  the upload page: /uploads?survey=quillmoor&profile=QM-1 (processors and leads)`);
}

/**
 * Uploads kept in an S3-compatible object store: starts s3rver (the tests' local S3) on a free
 * loopback port, sends three records of QM-1 and a copy of one through the upload code with the
 * object-store settings set, lists what the bucket holds (one object per content, named by its
 * SHA-256), and fetches each back into the data folder's copy, checked against its hash, as
 * completing the upload does. The upload is left open (completing it would queue the profile's
 * pipeline again); its files now have local copies, so it can be completed from the upload page
 * without the store. Not run with --prepare-only, so browser tests see no extra upload.
 */
async function demoObjectStore(fieldDir: string, processorEmail: string | undefined) {
  const s3 = await startLocalS3("tracewright-demo");
  const saved = { ...process.env };
  Object.assign(process.env, s3.env);
  try {
    const db = getDb();
    const user = processorEmail ? getUserByEmail(db, processorEmail) : null;
    const actor = { userId: user?.id ?? null, label: user?.name ?? "field crew", door: "web" as const };
    const session = openUpload(db, ensureSurvey(db, "quillmoor", "QM-1").profile!.id, actor);
    const records = fs.readdirSync(fieldDir).filter((n) => n.endsWith(".sg2")).sort().slice(0, 3);
    const files = [...records.map((name) => ({ name, bytes: fs.readFileSync(path.join(fieldDir, name)) }))];
    if (files[0]) files.push({ name: files[0].name.replace(/\.sg2$/, " (copy).sg2"), bytes: files[0].bytes });
    say(`\n  upload ${session.id} to the object store ${s3.url}, bucket ${s3.bucket} (s3rver, objects in ${s3.directory})`);
    fs.mkdirSync(transfersDir(), { recursive: true });
    const kept: { sha256: string; location: string }[] = [];
    for (const [i, f] of files.entries()) {
      const transferId = `demo-store-${session.id}-${i}`;
      admitFile(db, { sessionId: session.id, transferId, name: f.name, sizeBytes: f.bytes.length, limits: uploadLimits() });
      fs.writeFileSync(path.join(transfersDir(), transferId), f.bytes);
      const row = await checkArrivedFile(db, transferId, path.join(transfersDir(), transferId));
      say(`    ${f.name}: ${row.verdict}${row.storedPath ? ` → ${row.storedPath}` : ` (${row.message})`}`);
      if (row.verdict === "accepted" && row.sha256 && row.storedPath) kept.push({ sha256: row.sha256, location: row.storedPath });
    }
    closeDb();
    const { S3Client, ListObjectsV2Command } = await import("@aws-sdk/client-s3");
    const client = new S3Client({
      endpoint: s3.url,
      region: "us-east-1",
      forcePathStyle: true,
      credentials: { accessKeyId: s3.accessKeyId, secretAccessKey: s3.secretAccessKey },
      requestChecksumCalculation: "WHEN_REQUIRED",
      responseChecksumValidation: "WHEN_REQUIRED",
    });
    const listed = await client.send(new ListObjectsV2Command({ Bucket: s3.bucket }));
    client.destroy();
    say(`    the bucket holds ${listed.KeyCount ?? 0} objects for ${files.length} files sent:`);
    for (const o of listed.Contents ?? []) say(`      ${o.Key}  ${o.Size} bytes`);
    for (const k of kept) await localContentFile(k.sha256, k.location);
    say(`    fetched back into ${path.join(dataDir(), "uploads", "content")}, each checked against its SHA-256; settings: ${Object.keys(s3.env).join(", ")}`);
  } finally {
    process.env = saved;
    await s3.stop();
  }
}

/**
 * Shot work beyond one machine: when redis-server is installed, starts it and one `tracewright worker`
 * process, reruns the modelling run from forward-model with TRACEWRIGHT_REDIS_URL set (the snapshot times
 * changed, so the step computes again, its shots through the job queue), and compares the synthetic
 * gathers with those the local pool made: the same artifact hash. Skipped when redis-server is missing.
 */
async function demoShotQueue(as: string | undefined) {
  if (!redisServerAvailable()) {
    say("\n  shot work on a job queue: skipped (no redis-server on this machine; Debian: apt-get install redis-server)");
    return;
  }
  const db = getDb();
  const last = listRuns(db, { pipelineName: "quillmoor-qm1-starting-model", status: "succeeded", pageSize: 1 }).rows[0];
  const before = last ? getRun(db, last.id)?.steps.find((s) => s.stepId === "forward-model") : undefined;
  closeDb();
  if (!last || !before) return;
  say(`\n  shot work on a job queue: a redis-server and one worker process on this machine; rerunning run ${last.id} from forward-model through the queue`);
  const redis = await startLocalRedis();
  const worker = spawnWorkerProcess({ url: redis.url, dataDir: dataDir(), concurrency: 2 });
  try {
    const r = await cli(
      ["rerun", String(last.id), "--from", "forward-model", "--set", "forward-model.snapshotTimesS=[0.1]", ...(as ? ["--as", as] : [])],
      { TRACEWRIGHT_REDIS_URL: redis.url },
    );
    if (r.exitCode !== 0) throw new Error(`the rerun through the job queue failed (exit ${r.exitCode})`);
    const db2 = getDb();
    const rerun = listRuns(db2, { pipelineName: "quillmoor-qm1-starting-model", pageSize: 1 }).rows[0];
    const after = getRun(db2, rerun.id)?.steps.find((s) => s.stepId === "forward-model");
    closeDb();
    const a = String(before.outputs.synthetic ?? "");
    const b = String(after?.outputs.synthetic ?? "");
    say(`  synthetic gathers: local pool (run ${last.id}) ${a.slice(0, 12)}, job queue (run ${rerun.id}) ${b.slice(0, 12)}: ${a === b ? "identical, bit for bit" : "DIFFERENT"}`);
    if (a !== b) throw new Error("the job queue gave other synthetics than the local pool");
  } finally {
    await worker.stop("SIGTERM");
    await redis.stop();
  }
}

main().catch((err) => {
  process.stderr.write(`demo: ${(err as Error).message}\n`);
  process.exit(1);
});
