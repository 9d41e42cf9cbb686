/**
 * What goes into the client report of a run, gathered from the run's records and the artifact
 * store: who, where and when; the acquisition read from the records; each processing step with
 * its settings in plain words; a shot gather before and after processing; the starting and the
 * final model; the misfit by stage; observed against synthetic data; the lead's interpretation;
 * the cautions; and the provenance (every artifact hash the report was made from).
 *
 * Units: metres and m/s throughout; positions x along the profile (the profile's own line
 * coordinate, as in the geometry table), depths z positive down from the ground surface.
 */
import fs from "node:fs";
import path from "node:path";
import type { Db } from "../../db/client";
import { projectRoot } from "../../db/paths";
import { getRun, type RunDetail, type RunStepDetail } from "../../db/queries/runs";
import { listReviews } from "../../db/queries/reviews";
import { listIntermediates } from "../../db/queries/intermediates";
import { getPipelineVersion } from "../../db/queries/pipelines";
import { getDataset } from "../../db/queries/datasets";
import { runPlace } from "../../db/queries/reports";
import { getRunRecord } from "../../db/queries/run-records";
import { INTERPRETATION_SECTIONS, latestInterpretation } from "../../db/queries/interpretations";
import { readArtifactSync } from "../artifact-store";
import { AppError } from "../errors";
import { sha256Hex } from "../hash";
import { describeParams, getStep } from "../registry";
import type { ElasticModel, Gather, GatherSet } from "../types";
import { INVERTED_MODEL_CAUTION_HEADING, INVERTED_MODEL_CAUTIONS } from "./cautions";

/** What the lead chooses for a report. */
export interface ReportChoices {
  /** Positions along the profile for the depth profiles, m (default: a quarter, half and three quarters along the spread). */
  profilePositionsM?: number[];
  /** Gather ids of the shots shown observed against synthetic (default: the first shot and the one nearest the middle). */
  fitShots?: string[];
}

export interface ReportStepSetting {
  /** Plain words: the setting's description with its unit. */
  words: string;
  value: string;
}

export interface ReportStep {
  position: number;
  label: string;
  stepId: string;
  title: string;
  description: string;
  settings: ReportStepSetting[];
  cacheHit: boolean;
  durationMs: number | null;
}

export interface MisfitStage {
  stage: number;
  lowPassHz: number | null;
  measure: string | null;
  iterations: number | null;
  startMisfit: number | null;
  endMisfit: number | null;
  stoppedBy: string | null;
  /** The starting and the final model under this stage's measure (the inversion's measure table), when recorded. */
  startModelMisfit?: number | null;
  finalModelMisfit?: number | null;
  points: Array<{ x: number; y: number }>;
}

export interface ReportContent {
  run: { id: number; status: string; pipelineName: string; pipelineVersion: number; pipelineHash: string | null; createdAt: Date; finishedAt: Date | null };
  survey: { name: string; slug: string | null; site: string; client: string; description: string };
  profile: { name: string; description: string; coordinateReference: string };
  firm: string;
  processedBy: string;
  approvedBy: { name: string; at: Date; comment: string };
  acquisition: {
    dataset: { name: string; hash: string; fileCount: number; totalBytes: number };
    records: number;
    channelsPerRecord: number;
    receiverFirstM: number;
    receiverLastM: number;
    receiverSpacingM: number | null;
    sourcePositionsM: number[];
    blowsPerSourcePoint: number;
    component: string;
    sampleIntervalMs: number;
    samples: number;
    recordLengthMs: number;
    startTimeMs: number;
  };
  steps: ReportStep[];
  gathers: { before: Gather; beforeStep: string; after: Gather; afterStep: string };
  models: { starting: ElasticModel; final: ElasticModel; startingStep: string; finalStep: string };
  profilePositionsM: number[];
  misfit: MisfitStage[];
  inversion: { invertFor: string; iterations: number | null; forwardSolves: number | null; shots: number };
  fit: { stageLabel: string; shots: Array<{ id: string; sourceX: number; observed: Gather; synthetic: Gather }> };
  interpretation: Array<{ section: string; heading: string; text: string; version: number; author: string; at: Date }>;
  cautions: { heading: string; items: readonly string[] };
  provenance: {
    artifacts: Array<{ step: string; slot: string; hash: string }>;
    geometryTableHash: string | null;
    software: string;
  };
}

/** The firm's name printed on the title page (TRACEWRIGHT_FIRM, else a neutral label). */
export function firmName(): string {
  return process.env.TRACEWRIGHT_FIRM?.trim() || "Geophysics office";
}

/** The version of this software as package.json gives it, with the Node.js version. */
export function softwareVersion(): string {
  let version = "unknown";
  try {
    version = (JSON.parse(fs.readFileSync(path.join(projectRoot, "package.json"), "utf8")) as { version: string }).version;
  } catch {
    // a bundled server without package.json beside it
  }
  return `Tracewright ${version} (Node.js ${process.versions.node})`;
}

const fmt = (v: unknown): string => {
  if (typeof v === "number") return Number.isInteger(v) ? String(v) : String(+v.toPrecision(6));
  if (typeof v === "boolean") return v ? "yes" : "no";
  if (v === null || v === undefined) return "none";
  if (typeof v === "string") return v;
  if (Array.isArray(v)) return v.length === 0 ? "none" : v.map(fmt).join("; ");
  return Object.entries(v as Record<string, unknown>)
    .map(([k, x]) => `${k} ${fmt(x)}`)
    .join(", ");
};

/** The settings of a step in plain words: each setting's own description (with its unit) and the value used. */
export function settingsInWords(stepId: string, params: Record<string, unknown>): ReportStepSetting[] {
  let docs: Array<{ name: string; description: string }> = [];
  try {
    docs = describeParams(getStep(stepId) as never);
  } catch {
    docs = [];
  }
  const byName = new Map(docs.map((d) => [d.name, d.description]));
  return Object.entries(params).map(([name, value]) => ({ words: byName.get(name) || name, value: fmt(value) }));
}

function median(values: number[]): number | null {
  if (values.length === 0) return null;
  const s = [...values].sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)];
}

const unique = (xs: number[]) => [...new Set(xs.map((x) => +x.toFixed(3)))].sort((a, b) => a - b);

function asGathers(hash: string, what: string): GatherSet {
  const v = readArtifactSync(hash) as GatherSet;
  if (v?.kind !== "gathers") throw new AppError("conflict", `${what} (artifact ${hash.slice(0, 12)}) is not a set of gathers`);
  return v;
}

function asModel(hash: string, what: string): ElasticModel {
  const v = readArtifactSync(hash) as ElasticModel;
  if (v?.kind !== "model") throw new AppError("conflict", `${what} (artifact ${hash.slice(0, 12)}) is not a model`);
  return v;
}

function sourceXOf(g: Gather): number {
  return g.traces[0]?.sourceX ?? 0;
}

/** The gather of `set` whose source is nearest `x`. */
function nearestGather(set: GatherSet, x: number): Gather {
  let best = set.gathers[0];
  for (const g of set.gathers) if (Math.abs(sourceXOf(g) - x) < Math.abs(sourceXOf(best) - x)) best = g;
  return best;
}

function parseStageGroup(group: string | undefined): { stage: number; lowPassHz: number | null } {
  const m = /stage\s+(\d+)(?:\s*\(([\d.]+)\s*Hz\))?/i.exec(group ?? "");
  return { stage: m ? Number(m[1]) : 1, lowPassHz: m?.[2] ? Number(m[2]) : null };
}

function misfitStages(step: RunStepDetail, report: Record<string, unknown> | null): MisfitStage[] {
  const series = step.series.find((s) => s.name === "misfit");
  const byStage = new Map<number, MisfitStage>();
  for (const p of series?.points ?? []) {
    if (!Number.isFinite(p.y)) continue;
    const g = parseStageGroup(p.group);
    const s = byStage.get(g.stage) ?? {
      stage: g.stage,
      lowPassHz: g.lowPassHz,
      measure: null,
      iterations: null,
      startMisfit: null,
      endMisfit: null,
      stoppedBy: null,
      points: [],
    };
    s.points.push({ x: p.x, y: p.y });
    byStage.set(g.stage, s);
  }
  const records = (report?.stages as Array<Record<string, unknown>> | undefined) ?? [];
  records.forEach((r, k) => {
    const s = byStage.get(k + 1) ?? { stage: k + 1, lowPassHz: null, measure: null, iterations: null, startMisfit: null, endMisfit: null, stoppedBy: null, points: [] };
    const num = (v: unknown) => (typeof v === "number" && Number.isFinite(v) ? v : null);
    s.lowPassHz = num(r.lowPassHz) ?? s.lowPassHz;
    s.measure = typeof r.measure === "string" ? r.measure : s.measure;
    s.iterations = num(r.iterations);
    s.startMisfit = num(r.startMisfit);
    s.endMisfit = num(r.endMisfit);
    s.stoppedBy = typeof r.stoppedBy === "string" ? r.stoppedBy : null;
    byStage.set(k + 1, s);
  });
  const table = (report?.measureTable as Array<Record<string, unknown>> | undefined) ?? [];
  for (const r of table) {
    const s = typeof r.stage === "number" ? byStage.get(r.stage) : undefined;
    if (!s) continue;
    s.startModelMisfit = typeof r.startModelMisfit === "number" && Number.isFinite(r.startModelMisfit) ? r.startModelMisfit : null;
    s.finalModelMisfit = typeof r.finalModelMisfit === "number" && Number.isFinite(r.finalModelMisfit) ? r.finalModelMisfit : null;
  }
  return [...byStage.values()].sort((a, b) => a.stage - b.stage).map((s) => ({ ...s, points: s.points.sort((a, b) => a.x - b.x) }));
}

/** Where the report's positions are measured from, in words. */
export function coordinateReference(profileName: string): string {
  return (
    `Local line coordinate of profile ${profileName}: x in metres along the profile from its zero station, as in the geometry table of the survey; ` +
    `z in metres below the ground surface, positive down. No map projection or elevation datum is applied.`
  );
}

/**
 * Reads everything the report of run `runId` shows. Throws AppError "not-found" for an unknown
 * run and "conflict" for a run that is not approved or has no waveform inversion.
 */
export function collectReportContent(db: Db, runId: number, choices: ReportChoices = {}): ReportContent {
  const run: RunDetail | null = getRun(db, runId);
  if (!run) throw new AppError("not-found", `Run ${runId} does not exist`);
  const approval = listReviews(db, runId)[0];
  if (!approval || approval.decision !== "approved") {
    throw new AppError("conflict", `Run ${runId} is not approved; a lead approves a run before its client report is made`);
  }
  const inversion = [...run.steps].reverse().find((s) => s.stepId === "waveform-inversion" && s.status === "succeeded");
  if (!inversion?.outputs.model || !inversion.inputs.model || !inversion.inputs.gathers) {
    throw new AppError("conflict", `Run ${runId} has no finished waveform-inversion step; the client report shows an inverted model`);
  }
  const labelOfOutput = (hash: string, slot: string) => run.steps.find((s) => s.outputs[slot] === hash)?.label ?? "input";

  const starting = asModel(inversion.inputs.model, "the starting model");
  const final = asModel(inversion.outputs.model, "the inverted model");
  const processed = asGathers(inversion.inputs.gathers, "the processed gathers");
  const rawStep = run.steps.find((s) => s.outputs.gathers);
  const raw = rawStep ? asGathers(rawStep.outputs.gathers, "the imported records") : processed;
  const report = inversion.outputs.report ? ((readArtifactSync(inversion.outputs.report) as { data?: Record<string, unknown> }).data ?? null) : null;

  // Observed against synthetic at the end of the last stage (recorded by the inversion step).
  const records = listIntermediates(db, inversion.id);
  const lastIndex = Math.max(-1, ...records.filter((r) => r.kind === "synthetic").map((r) => r.index));
  const obsRec = records.find((r) => r.kind === "observed" && r.index === lastIndex);
  const synRec = records.find((r) => r.kind === "synthetic" && r.index === lastIndex);
  const observed = obsRec ? asGathers(obsRec.artifactHash, "the observed data of the last stage") : processed;
  const synthetic = synRec
    ? asGathers(synRec.artifactHash, "the synthetic data of the last stage")
    : inversion.outputs.synthetic
      ? asGathers(inversion.outputs.synthetic, "the final synthetics")
      : null;
  if (!synthetic) throw new AppError("conflict", `Run ${runId}: the inversion recorded no synthetic data to compare with the observed`);
  const allShots = synthetic.gathers.map((g) => g.id);
  let fitIds = (choices.fitShots ?? []).filter((id) => allShots.includes(id));
  const unknown = (choices.fitShots ?? []).filter((id) => !allShots.includes(id));
  if (unknown.length) throw new AppError("bad-input", `Shots ${unknown.join(", ")} are not among the inverted shots: ${allShots.join(", ")}`, { field: "fitShots" });
  if (fitIds.length === 0) {
    const mid = synthetic.gathers[Math.floor(synthetic.gathers.length / 2)];
    fitIds = [...new Set([synthetic.gathers[0].id, mid.id])];
  }
  const fitShots = fitIds.map((id) => {
    const syn = synthetic.gathers.find((g) => g.id === id)!;
    const obs = observed.gathers.find((g) => g.id === id) ?? nearestGather(observed, sourceXOf(syn));
    return { id, sourceX: sourceXOf(syn), observed: obs, synthetic: syn };
  });

  // Acquisition, from the records as imported.
  const traces = raw.gathers.flatMap((g) => g.traces);
  const receivers = unique(traces.map((t) => t.receiverX));
  const first = raw.gathers[0];
  const spreadFirst = receivers[0] ?? 0;
  const spreadLast = receivers[receivers.length - 1] ?? 0;
  const positions = (choices.profilePositionsM?.length ? choices.profilePositionsM : [0.25, 0.5, 0.75].map((f) => spreadFirst + f * (spreadLast - spreadFirst))).map(
    (x) => +x.toFixed(2),
  );
  const modelLeft = final.originX;
  const modelRight = final.originX + (final.nx - 1) * final.spacingM;
  for (const x of positions) {
    if (!Number.isFinite(x) || x < modelLeft || x > modelRight) {
      throw new AppError("bad-input", `Profile position ${x} m is outside the model (${modelLeft} to ${modelRight} m along the profile)`, { field: "profilePositionsM" });
    }
  }

  const place = runPlace(db, runId);
  const dataset = getDataset(db, run.datasetId);
  const pv = getPipelineVersion(db, run.pipelineVersionId);
  const profileName = place.profile?.name ?? run.profileName ?? "(unnamed profile)";
  const texts = latestInterpretation(db, runId);
  const headings = new Map<string, string>(INTERPRETATION_SECTIONS.map((s) => [s.id, s.heading]));

  const artifacts: Array<{ step: string; slot: string; hash: string }> = [];
  for (const s of run.steps) for (const [slot, hash] of Object.entries(s.outputs)) artifacts.push({ step: s.label, slot, hash });
  if (obsRec) artifacts.push({ step: inversion.label, slot: `observed (${obsRec.label ?? `stage ${lastIndex}`})`, hash: obsRec.artifactHash });
  if (synRec) artifacts.push({ step: inversion.label, slot: `synthetic (${synRec.label ?? `stage ${lastIndex}`})`, hash: synRec.artifactHash });

  return {
    run: {
      id: run.id,
      status: run.status,
      pipelineName: run.pipelineName,
      pipelineVersion: run.pipelineVersion,
      pipelineHash: pv?.version.contentHash ?? null,
      createdAt: run.createdAt,
      finishedAt: run.finishedAt,
    },
    survey: {
      name: place.survey?.name ?? run.surveyName ?? "(no survey)",
      slug: place.survey?.slug ?? run.surveySlug,
      site: place.survey?.site ?? "",
      client: place.survey?.client ?? "",
      description: place.survey?.description ?? "",
    },
    profile: { name: profileName, description: place.profile?.description ?? "", coordinateReference: coordinateReference(profileName) },
    firm: firmName(),
    processedBy: run.startedByName ?? run.startedByLabel,
    approvedBy: { name: approval.reviewerName, at: approval.at, comment: approval.comment },
    acquisition: {
      dataset: { name: run.datasetName, hash: run.datasetHash, fileCount: dataset?.fileCount ?? 0, totalBytes: dataset?.totalBytes ?? 0 },
      records: raw.gathers.length,
      channelsPerRecord: Math.max(0, ...raw.gathers.map((g) => g.traces.length)),
      receiverFirstM: spreadFirst,
      receiverLastM: spreadLast,
      receiverSpacingM: median(receivers.slice(1).map((x, i) => +(x - receivers[i]).toFixed(3))),
      sourcePositionsM: unique(traces.map((t) => t.sourceX)),
      blowsPerSourcePoint: Math.max(1, ...traces.map((t) => t.blow)),
      component: first?.traces[0]?.component ?? "z",
      sampleIntervalMs: (first?.sampleIntervalS ?? 0) * 1000,
      samples: first?.sampleCount ?? 0,
      recordLengthMs: (first?.sampleIntervalS ?? 0) * (first?.sampleCount ?? 0) * 1000,
      startTimeMs: (first?.startTimeS ?? 0) * 1000,
    },
    steps: run.steps.map((s) => {
      let title = s.stepId;
      let description = "";
      try {
        const def = getStep(s.stepId);
        title = def.title;
        description = def.description;
      } catch {
        // a step no longer registered: its id stands for its title
      }
      return {
        position: s.position,
        label: s.label,
        stepId: s.stepId,
        title,
        description,
        settings: settingsInWords(s.stepId, s.params),
        cacheHit: s.cacheHit,
        durationMs: s.durationMs,
      };
    }),
    gathers: {
      before: nearestGather(raw, fitShots[0].sourceX),
      beforeStep: rawStep?.label ?? inversion.label,
      after: nearestGather(processed, fitShots[0].sourceX),
      afterStep: labelOfOutput(inversion.inputs.gathers, "gathers"),
    },
    models: { starting, final, startingStep: labelOfOutput(inversion.inputs.model, "model"), finalStep: inversion.label },
    profilePositionsM: positions,
    misfit: misfitStages(inversion, report),
    inversion: {
      invertFor: String(report?.invertFor ?? inversion.params.invertFor ?? "vs"),
      iterations: typeof report?.iterations === "number" ? report.iterations : null,
      forwardSolves: typeof report?.forwardSolves === "number" ? report.forwardSolves : null,
      shots: synthetic.gathers.length,
    },
    fit: { stageLabel: synRec?.label ?? "final model", shots: fitShots },
    interpretation: texts.map((t) => ({ section: t.section, heading: headings.get(t.section) ?? t.section, text: t.text, version: t.version, author: t.authorLabel, at: t.at })),
    cautions: { heading: INVERTED_MODEL_CAUTION_HEADING, items: INVERTED_MODEL_CAUTIONS },
    provenance: { artifacts, geometryTableHash: getRunRecord(db, runId).geometryTableHash, software: softwareVersion() },
  };
}

/**
 * The report's fingerprint: SHA-256 over a canonical description of everything it shows (run,
 * pipeline version, dataset, every artifact hash, the interpretation texts and versions, the
 * chosen positions and shots, who made it and when, the software). The same inputs give the same
 * fingerprint; any change to what the report was made from changes it.
 */
export function reportFingerprint(c: ReportContent, made: { at: Date; by: string }): string {
  const canonical = JSON.stringify({
    run: c.run.id,
    pipeline: [c.run.pipelineName, c.run.pipelineVersion, c.run.pipelineHash],
    dataset: c.acquisition.dataset.hash,
    geometry: c.provenance.geometryTableHash,
    approved: [c.approvedBy.name, c.approvedBy.at.toISOString()],
    artifacts: c.provenance.artifacts.map((a) => [a.step, a.slot, a.hash]),
    interpretation: c.interpretation.map((t) => [t.section, t.version, sha256Hex(t.text)]),
    positions: c.profilePositionsM,
    shots: c.fit.shots.map((s) => s.id),
    firm: c.firm,
    made: [made.at.toISOString(), made.by],
    software: c.provenance.software,
  });
  return sha256Hex(canonical);
}
