/**
 * Reproducing a run: the run executed again from its recorded inputs and settings in a scratch
 * data folder with a fresh database (so nothing can come from the cache), in a process of its
 * own, then every artifact compared with the one recorded.
 *
 *   1. inputs: the dataset's field files, copied from their folder only if each still has the
 *      SHA-256 recorded with the dataset; the run's geometry table from its artifact (hash checked)
 *   2. scratch database: the same pipeline version (text and definition), the dataset, and a
 *      queued run with the original run's steps, labels, step versions and settings
 *   3. `tracewright execute-run` in a child process with TRACEWRIGHT_DATA_DIR / TRACEWRIGHT_DB
 *      pointing at the scratch folder; its step progress is relayed to the reproduction record
 *   4. per step: step version and cache key against those recorded (a changed setting or input
 *      shows here); per output and intermediate result: the hashes, whether the stored file
 *      still has its recorded hash, and where hashes differ the numerical difference
 *      (pipeline/reproduce-compare.ts)
 *
 * Verdict: "identical" (every hash equal and every stored file intact), "within-tolerance"
 * (some arrays differ by at most the tolerance, nothing else), "different", or "failed" (the
 * reproduction could not run: inputs gone or changed, or the run failed).
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { execa } from "execa";
import { openDatabase, type Db } from "../db/client";
import { registerArtifact } from "../db/queries/artifacts";
import type { Actor } from "../db/queries/audit";
import { ensureDataset, getDataset, listDatasetFiles } from "../db/queries/datasets";
import { listIntermediates } from "../db/queries/intermediates";
import { getPipelineVersion, savePipelineVersion } from "../db/queries/pipelines";
import {
  claimReproduction,
  finishReproduction,
  getReproduction,
  insertReproduction,
  recordReproductionProgress,
  type ReproductionVerdict,
} from "../db/queries/reproductions";
import { getRunRecord, getRunStepRecords, insertQueuedRun, type RunStepRecord } from "../db/queries/run-records";
import { projectRoot } from "../db/paths";
import { decodeArtifact } from "./artifact-codec";
import { artifactFilePath, artifactRelativePath } from "./artifact-store";
import { AppError, toAppError } from "./errors";
import { sha256Hex } from "./hash";
import { getStep } from "./registry";
import { compareValues, DEFAULT_RELATIVE_TOLERANCE } from "./reproduce-compare";

export interface ReproduceOptions {
  actor: Actor;
  /** A reproduction already requested (the control room records it, then starts this in the background). */
  reproductionId?: number;
  /** Scratch data folder; default a new folder in the system's temporary folder. Must be empty or absent. */
  scratchDir?: string;
  /** Keep the scratch folder afterwards (to look at it). @default false */
  keepScratch?: boolean;
  /** Tolerance on the relative difference of numeric arrays. @default DEFAULT_RELATIVE_TOLERANCE (1e-5) */
  relativeTolerance?: number;
  /** The command-line entry that executes the run (a program with the same steps registered). @default cli/index.ts */
  engineEntry?: string;
  onProgress?: (fraction: number, message: string) => void;
}

export type ArtifactOutcome = "identical" | "within-tolerance" | "different" | "missing";

export interface ArtifactComparison {
  /** "output" of a slot, or an intermediate result ("model #3"). */
  kind: "output" | "intermediate";
  name: string;
  recordedHash: string | null;
  reproducedHash: string | null;
  /** The stored file of the recorded artifact still hashes to its name. */
  recordedFileIntact: boolean | null;
  outcome: ArtifactOutcome;
  maxRelativeDifference?: number;
  maxAbsoluteDifference?: number;
  /** Where in the value the largest difference is, or where the shapes part. */
  where?: string;
  note?: string;
}

export interface StepComparison {
  position: number;
  label: string;
  stepId: string;
  recordedVersion: number;
  reproducedVersion: number | null;
  /** The reproduced step's cache key (step, version, settings, input hashes) equals the recorded one. */
  cacheKeyMatches: boolean;
  outcome: ArtifactOutcome;
  artifacts: ArtifactComparison[];
  durationMs: number | null;
}

export interface ReproductionReport {
  reproductionId: number;
  runId: number;
  verdict: ReproductionVerdict;
  relativeTolerance: number;
  durationMs: number;
  steps: StepComparison[];
  /** Counts of artifacts per outcome. */
  counts: Record<ArtifactOutcome, number>;
  error?: string;
  scratchDir?: string;
}

const WORST: ArtifactOutcome[] = ["identical", "within-tolerance", "different", "missing"];
const worse = (a: ArtifactOutcome, b: ArtifactOutcome): ArtifactOutcome => (WORST.indexOf(a) >= WORST.indexOf(b) ? a : b);

/** Reproduces run `runId` and records the verdict; returns the report (also stored as the verdict's details). */
export async function reproduceRun(db: Db, runId: number, opts: ReproduceOptions): Promise<ReproductionReport> {
  const started = Date.now();
  const tolerance = opts.relativeTolerance ?? DEFAULT_RELATIVE_TOLERANCE;
  if (!(tolerance >= 0 && Number.isFinite(tolerance))) throw new AppError("bad-input", `tolerance must be a number ≥ 0, got ${tolerance}`, { field: "tolerance" });
  const run = getRunRecord(db, runId);
  if (run.status !== "succeeded") throw new AppError("conflict", `Run ${runId} is ${run.status}; only a succeeded run has every artifact to compare`, { field: "runId" });

  let reproductionId: number;
  if (opts.reproductionId !== undefined) {
    const existing = getReproduction(db, opts.reproductionId);
    if (!existing || existing.runId !== runId) throw new AppError("not-found", `Reproduction ${opts.reproductionId} of run ${runId} does not exist`, { field: "reproductionId" });
    if (existing.verdict !== "running" || existing.finishedAt) throw new AppError("conflict", `Reproduction ${opts.reproductionId} already has its verdict (${existing.verdict})`);
    reproductionId = existing.id;
  } else {
    reproductionId = insertReproduction(db, { runId, actor: opts.actor });
  }
  claimReproduction(db, reproductionId, process.pid);
  let lastWrite = 0;
  const progress = (fraction: number, message: string) => {
    opts.onProgress?.(fraction, message);
    const now = Date.now();
    if (now - lastWrite < 400 && fraction < 1) return;
    lastWrite = now;
    try {
      recordReproductionProgress(db, reproductionId, fraction, message);
    } catch {
      // progress is best effort
    }
  };

  const scratch = opts.scratchDir ? path.resolve(opts.scratchDir) : fs.mkdtempSync(path.join(os.tmpdir(), "tracewright-reproduce-"));
  const report: ReproductionReport = {
    reproductionId,
    runId,
    verdict: "failed",
    relativeTolerance: tolerance,
    durationMs: 0,
    steps: [],
    counts: { identical: 0, "within-tolerance": 0, different: 0, missing: 0 },
    ...(opts.keepScratch ? { scratchDir: scratch } : {}),
  };
  let scratchDb: Db | undefined;
  try {
    if (fs.existsSync(scratch) && fs.readdirSync(scratch).length > 0) {
      throw new AppError("conflict", `The scratch folder ${scratch} is not empty; name an empty or new folder`, { file: scratch });
    }
    progress(0.01, "copying the recorded inputs");
    const prepared = prepareScratch(db, runId, scratch, opts.actor);
    scratchDb = prepared.db;
    progress(0.05, "executing the run without the cache");
    await executeInScratch(scratchDb, prepared.runId, scratch, opts.engineEntry, (f, m) => progress(0.05 + 0.85 * f, m));
    const reproduced = getRunRecord(scratchDb, prepared.runId);
    if (reproduced.status !== "succeeded") {
      throw new AppError("step-failed", `the reproduction of run ${runId} ${reproduced.status}${reproduced.error ? `: ${reproduced.error}` : ""}`);
    }
    progress(0.92, "comparing every artifact");
    report.steps = compareSteps(db, getRunStepRecords(db, runId), scratchDb, getRunStepRecords(scratchDb, prepared.runId), scratch, tolerance);
    for (const s of report.steps) for (const a of s.artifacts) report.counts[a.outcome]++;
    const overall = report.steps.reduce<ArtifactOutcome>((acc, s) => worse(acc, s.outcome), "identical");
    report.verdict = overall === "missing" ? "different" : overall;
  } catch (err) {
    const e = toAppError(err);
    report.verdict = "failed";
    report.error = e.message;
  } finally {
    scratchDb?.$client.close();
    if (!opts.keepScratch) fs.rmSync(scratch, { recursive: true, force: true });
  }
  report.durationMs = Date.now() - started;
  finishReproduction(db, reproductionId, { verdict: report.verdict, details: report, error: report.error ?? null, actor: opts.actor, runId });
  opts.onProgress?.(1, `verdict: ${report.verdict}`);
  return report;
}

/** Copies the run's inputs into `scratch` and queues the same run in a fresh database there. */
function prepareScratch(db: Db, runId: number, scratch: string, actor: Actor): { db: Db; runId: number } {
  const run = getRunRecord(db, runId);
  const pv = getPipelineVersion(db, run.pipelineVersionId);
  if (!pv) throw new AppError("not-found", `Pipeline version ${run.pipelineVersionId} of run ${runId} does not exist`);
  const dataset = getDataset(db, run.datasetId);
  if (!dataset) throw new AppError("not-found", `Dataset ${run.datasetId} of run ${runId} does not exist`);
  const files = listDatasetFiles(db, dataset.id);

  const field = path.join(scratch, "field");
  fs.mkdirSync(field, { recursive: true });
  for (const f of files) {
    const from = path.join(dataset.folderPath, f.name);
    let bytes: Buffer;
    try {
      bytes = fs.readFileSync(from);
    } catch {
      throw new AppError("not-found", `the recorded input ${from} is gone, so run ${runId} cannot be reproduced`, { file: from });
    }
    if (sha256Hex(bytes) !== f.sha256) {
      throw new AppError("conflict", `the recorded input ${from} has changed since run ${runId} (SHA-256 ${sha256Hex(bytes).slice(0, 12)}…, recorded ${f.sha256.slice(0, 12)}…)`, { file: from });
    }
    fs.writeFileSync(path.join(field, f.name), bytes);
  }
  if (run.geometryTableHash) copyArtifact(run.geometryTableHash, scratch, "the run's geometry table");

  const sdb = openDatabase(path.join(scratch, "tracewright.db"));
  // The scratch database has no users: the requester is recorded there by name only.
  actor = { userId: null, label: actor.label, door: actor.door };
  try {
    const { version } = savePipelineVersion(sdb, {
      name: pv.pipeline.name,
      surveyId: null,
      sourceText: pv.version.sourceText,
      sourcePath: pv.version.sourcePath,
      definition: JSON.parse(pv.version.definitionJson),
      contentHash: pv.version.contentHash,
      actor,
    });
    const sds = ensureDataset(sdb, {
      folderPath: dataset.folderPath ? field : "",
      contentHash: dataset.contentHash,
      files: files.map((f) => ({ name: f.name, sizeBytes: f.sizeBytes, sha256: f.sha256 })),
      surveyId: null,
      profileId: null,
      name: dataset.name,
    });
    if (run.geometryTableHash) {
      const rel = artifactRelativePath(run.geometryTableHash);
      registerArtifact(sdb, { hash: run.geometryTableHash, kind: "geometryTable", path: rel, sizeBytes: fs.statSync(path.join(scratch, rel)).size });
    }
    const scratchRunId = insertQueuedRun(sdb, {
      pipelineVersionId: version.id,
      datasetId: sds.id,
      actor,
      steps: getRunStepRecords(db, runId).map((s) => ({ label: s.label, stepId: s.stepId, stepVersion: s.stepVersion, paramsJson: s.paramsJson })),
      parentRunId: null,
      rerunFromStep: null,
      overrides: {},
      geometryTableHash: run.geometryTableHash,
    });
    return { db: sdb, runId: scratchRunId };
  } catch (err) {
    sdb.$client.close();
    throw err;
  }
}

/** Copies one artifact file of the data folder into the scratch folder, checking its hash. */
function copyArtifact(hash: string, scratch: string, what: string): void {
  let bytes: Buffer;
  try {
    bytes = fs.readFileSync(artifactFilePath(hash));
  } catch {
    throw new AppError("not-found", `${what} (artifact ${hash.slice(0, 12)}…) is no longer in the data folder`);
  }
  if (sha256Hex(bytes) !== hash) throw new AppError("conflict", `${what} (artifact ${hash.slice(0, 12)}…) was changed on disk: its content no longer has its hash`);
  const to = path.join(scratch, artifactRelativePath(hash));
  fs.mkdirSync(path.dirname(to), { recursive: true });
  fs.writeFileSync(to, bytes);
}

/** Runs `execute-run` for the scratch run in a child process, relaying the progress of its steps. */
async function executeInScratch(sdb: Db, scratchRunId: number, scratch: string, entry: string | undefined, progress: (fraction: number, message: string) => void): Promise<void> {
  const cli = entry ?? path.join(projectRoot, "cli", "index.ts");
  const child = execa(process.execPath, ["--import", "tsx", cli, "execute-run", String(scratchRunId)], {
    cwd: projectRoot,
    env: { ...process.env, TRACEWRIGHT_DATA_DIR: scratch, TRACEWRIGHT_DB: path.join(scratch, "tracewright.db") },
    reject: false,
    all: true,
  });
  const poll = setInterval(() => {
    try {
      const steps = getRunStepRecords(sdb, scratchRunId);
      const done = steps.filter((s) => s.status === "succeeded").length;
      const current = steps.find((s) => s.status === "running");
      const fraction = steps.length ? (done + (current?.progress ?? 0)) / steps.length : 0;
      progress(fraction, current ? `step ${current.position + 1} of ${steps.length}: ${current.label}${current.progressMessage ? ` (${current.progressMessage})` : ""}` : `${done} of ${steps.length} steps done`);
    } catch {
      // the child may hold the write lock for a moment
    }
  }, 500);
  try {
    const result = await child;
    if (result.exitCode !== 0 && getRunRecord(sdb, scratchRunId).status === "queued") {
      throw new AppError("step-failed", `the engine process for the reproduction did not start the run: ${String(result.all ?? "").trim().split("\n").slice(-3).join(" ")}`);
    }
  } finally {
    clearInterval(poll);
  }
}

/** Reads, hashes and decodes one artifact file; null when it is not there. */
function loadArtifact(file: string): { bytes: Uint8Array; hash: string } | null {
  if (!fs.existsSync(file)) return null;
  const bytes = new Uint8Array(fs.readFileSync(file));
  return { bytes, hash: sha256Hex(bytes) };
}

function compareArtifact(kind: ArtifactComparison["kind"], name: string, recordedHash: string | null, reproducedHash: string | null, scratch: string, tolerance: number): ArtifactComparison {
  const base = { kind, name, recordedHash, reproducedHash };
  if (!recordedHash || !reproducedHash) {
    return { ...base, recordedFileIntact: null, outcome: "missing", note: recordedHash ? "the reproduction did not produce it" : "the run did not record it" };
  }
  const stored = loadArtifact(artifactFilePath(recordedHash));
  const intact = stored !== null && stored.hash === recordedHash;
  if (recordedHash === reproducedHash && intact) return { ...base, recordedFileIntact: true, outcome: "identical" };
  if (!stored) return { ...base, recordedFileIntact: false, outcome: "different", note: "the stored file of the recorded artifact is gone" };
  const fresh = loadArtifact(path.join(scratch, artifactRelativePath(reproducedHash)));
  if (!fresh) return { ...base, recordedFileIntact: intact, outcome: "missing", note: "the reproduced artifact file is missing" };
  let cmp;
  try {
    cmp = compareValues(decodeArtifact(stored.bytes, `artifact ${recordedHash.slice(0, 12)}`), decodeArtifact(fresh.bytes, `artifact ${reproducedHash.slice(0, 12)}`));
  } catch (err) {
    return { ...base, recordedFileIntact: intact, outcome: "different", note: `cannot be read for comparison: ${toAppError(err).message}` };
  }
  const numbers = { maxRelativeDifference: cmp.maxRelativeDifference, maxAbsoluteDifference: cmp.maxAbsoluteDifference };
  if (!intact) {
    return {
      ...base,
      recordedFileIntact: false,
      outcome: "different",
      ...numbers,
      where: cmp.shapeDifference ?? cmp.worstAt,
      note: recordedHash === reproducedHash ? "the stored file was changed after the run: the reproduction has the recorded hash, the file on disk does not" : "the stored file no longer has its recorded hash",
    };
  }
  if (!cmp.sameShape) return { ...base, recordedFileIntact: true, outcome: "different", ...numbers, where: cmp.shapeDifference };
  return { ...base, recordedFileIntact: true, outcome: cmp.maxRelativeDifference <= tolerance ? "within-tolerance" : "different", ...numbers, where: cmp.worstAt };
}

function compareSteps(db: Db, recorded: RunStepRecord[], sdb: Db, reproduced: RunStepRecord[], scratch: string, tolerance: number): StepComparison[] {
  return recorded.map((r, i) => {
    const p = reproduced[i] as RunStepRecord | undefined;
    const outs = JSON.parse(r.outputsJson) as Record<string, string>;
    const pouts = p ? (JSON.parse(p.outputsJson) as Record<string, string>) : {};
    const artifacts: ArtifactComparison[] = [];
    for (const slot of [...new Set([...Object.keys(outs), ...Object.keys(pouts)])].sort()) {
      artifacts.push(compareArtifact("output", slot, outs[slot] ?? null, pouts[slot] ?? null, scratch, tolerance));
    }
    const inter = new Map(listIntermediates(db, r.id).map((x) => [`${x.kind} #${x.index}`, x.artifactHash]));
    const pinter = new Map(p ? listIntermediates(sdb, p.id).map((x) => [`${x.kind} #${x.index}`, x.artifactHash]) : []);
    for (const name of [...new Set([...inter.keys(), ...pinter.keys()])].sort()) {
      artifacts.push(compareArtifact("intermediate", name, inter.get(name) ?? null, pinter.get(name) ?? null, scratch, tolerance));
    }
    let currentVersion: number | null = null;
    try {
      currentVersion = getStep(r.stepId).version;
    } catch {
      // a step this program no longer has
    }
    const cacheKeyMatches = Boolean(p && r.cacheKey && p.cacheKey === r.cacheKey);
    let outcome = artifacts.reduce<ArtifactOutcome>((acc, a) => worse(acc, a.outcome), "identical");
    if (!cacheKeyMatches || currentVersion !== r.stepVersion) outcome = worse(outcome, "different");
    return {
      position: r.position,
      label: r.label,
      stepId: r.stepId,
      recordedVersion: r.stepVersion,
      reproducedVersion: currentVersion,
      cacheKeyMatches,
      outcome,
      artifacts,
      durationMs: p?.durationMs ?? null,
    };
  });
}
