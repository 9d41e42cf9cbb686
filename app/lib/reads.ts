/**
 * Server reads for pages and route handlers: thin wrappers over db/queries that return the
 * JSON-safe view types of app/lib/view-types.ts. No logic of their own beyond shaping.
 */
import "server-only";
import { getDb } from "@/db/client";
import { listIntermediates } from "@/db/queries/intermediates";
import { listReproductions, type ReproductionRecord } from "@/db/queries/reproductions";
import { latestDecisions } from "@/db/queries/review-decisions";
import { listReviews } from "@/db/queries/reviews";
import { getRun, getStepLogs, listRuns, type RunFilter, type RunRow } from "@/db/queries/runs";
import { describeParams, getStep } from "@/pipeline/registry";
import type { ReviewState } from "./run-filter";
import type { ReproductionReport } from "@/pipeline/reproduce";
import type { IntermediateView, LogLine, ReproductionView, RunListItem, RunListPage, RunView, StepView } from "./view-types";

const ms = (d: Date | null | undefined) => (d ? d.getTime() : null);

function toListItem(r: Omit<RunRow, "stepsDone" | "stepsTotal" | "cacheHits"> & Partial<RunRow>, review: RunListItem["review"] = null): RunListItem {
  const started = ms(r.startedAt);
  const finished = ms(r.finishedAt);
  return {
    id: r.id,
    status: r.status,
    door: r.door,
    startedBy: r.startedByLabel,
    parentRunId: r.parentRunId,
    rerunFromStep: r.rerunFromStep,
    createdAt: r.createdAt.getTime(),
    startedAt: started,
    finishedAt: finished,
    durationMs: started !== null && finished !== null ? finished - started : null,
    pipelineName: r.pipelineName,
    pipelineVersion: r.pipelineVersion,
    datasetName: r.datasetName,
    surveySlug: r.surveySlug,
    surveyName: r.surveyName,
    stepsDone: r.stepsDone ?? 0,
    stepsTotal: r.stepsTotal ?? 0,
    cacheHits: r.cacheHits ?? 0,
    error: r.error,
    review,
  };
}

function reviewOf(d: { decision: "approved" | "returned"; reviewer: string; at: Date } | undefined): RunListItem["review"] {
  return d ? { decision: d.decision, reviewer: d.reviewer, at: d.at.getTime() } : null;
}

function matchesReview(status: string, d: { decision: string } | undefined, want: ReviewState): boolean {
  if (want === "awaiting") return status === "succeeded" && !d;
  return d?.decision === want;
}

/**
 * A page of runs with each run's latest review. With a review filter, the runs matching the
 * other filters are read in chunks and filtered by their latest decision before paging (the
 * review state lives in its own table).
 */
export function readRunList(filter: RunFilter & { review?: ReviewState }): RunListPage {
  const db = getDb();
  const page = filter.page ?? 1;
  const pageSize = filter.pageSize ?? 25;
  const { review, ...rest } = filter;
  if (!review) {
    const { rows, total } = listRuns(db, { ...rest, page, pageSize });
    const decisions = latestDecisions(db, rows.map((r) => r.id));
    return { rows: rows.map((r) => toListItem(r, reviewOf(decisions.get(r.id)))), total, page, pageSize };
  }
  const chunk = 500;
  const matched: RunListItem[] = [];
  for (let p = 1; ; p++) {
    const { rows } = listRuns(db, { ...rest, status: review === "awaiting" ? "succeeded" : rest.status, page: p, pageSize: chunk });
    const decisions = latestDecisions(db, rows.map((r) => r.id));
    for (const r of rows) if (matchesReview(r.status, decisions.get(r.id), review)) matched.push(toListItem(r, reviewOf(decisions.get(r.id))));
    if (rows.length < chunk) break;
  }
  return { rows: matched.slice((page - 1) * pageSize, page * pageSize), total: matched.length, page, pageSize };
}

/** A run with steps, reviews and its parent chain, or null. */
export function readRun(id: number): RunView | null {
  const db = getDb();
  const run = getRun(db, id);
  if (!run) return null;
  const steps: StepView[] = run.steps.map((s) => ({
    id: s.id,
    position: s.position,
    label: s.label,
    stepId: s.stepId,
    stepVersion: s.stepVersion,
    status: s.status,
    progress: s.progress,
    progressMessage: s.progressMessage,
    cacheHit: s.cacheHit,
    cacheSourceRunId: s.cacheSourceRunId,
    cacheKey: s.cacheKey,
    params: s.params,
    inputs: s.inputs,
    outputs: s.outputs,
    inputSources: s.inputSources,
    summary: s.summary,
    series: s.series,
    error: s.error,
    startedAt: ms(s.startedAt),
    finishedAt: ms(s.finishedAt),
    durationMs: s.durationMs,
  }));
  const done = steps.filter((s) => s.status === "succeeded").length;
  const parentChain: RunView["parentChain"] = [];
  const seen = new Set<number>([id]);
  let parentId = run.parentRunId;
  while (parentId !== null && !seen.has(parentId) && parentChain.length < 50) {
    seen.add(parentId);
    const p = getRun(db, parentId);
    if (!p) break;
    parentChain.push({ id: p.id, status: p.status, startedBy: p.startedByLabel, createdAt: p.createdAt.getTime(), rerunFromStep: p.rerunFromStep });
    parentId = p.parentRunId;
  }
  return {
    ...toListItem({ ...run, stepsDone: done, stepsTotal: steps.length, cacheHits: steps.filter((s) => s.cacheHit).length }, reviewOf(latestDecisions(db, [id]).get(id))),
    datasetId: run.datasetId,
    datasetHash: run.datasetHash,
    datasetFolder: run.datasetFolder,
    profileName: run.profileName,
    pipelineVersionId: run.pipelineVersionId,
    pipelineSource: run.pipelineSource,
    startedByEmail: run.startedByEmail,
    overrides: run.overrides,
    cancelRequested: run.cancelRequested,
    steps,
    rejectedFiles: run.rejectedFiles,
    childRunIds: run.childRunIds,
    parentChain,
    reviews: listReviews(db, id).map((r) => ({
      id: r.id,
      decision: r.decision,
      comment: r.comment,
      reviewer: r.reviewerName,
      at: r.at.getTime(),
    })),
    reproductions: listReproductions(db, id).map(toReproductionView),
  };
}

function processAlive(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch (err) {
    return (err as NodeJS.ErrnoException).code === "EPERM";
  }
}

/** How long a requested reproduction may wait for its process to say who it is, ms. */
const REPRODUCTION_START_GRACE_MS = 120_000;

function toReproductionView(r: ReproductionRecord): ReproductionView {
  let report: ReproductionReport | null = null;
  try {
    report = r.detailsJson ? (JSON.parse(r.detailsJson) as ReproductionReport | null) : null;
  } catch {
    report = null;
  }
  const gone = r.verdict === "running" && (r.hostPid !== null ? !processAlive(r.hostPid) : Date.now() - r.startedAt.getTime() > REPRODUCTION_START_GRACE_MS);
  return {
    id: r.id,
    requestedBy: r.requestedByLabel,
    startedAt: r.startedAt.getTime(),
    finishedAt: ms(r.finishedAt),
    verdict: gone ? "stopped" : r.verdict,
    progress: r.progress,
    progressMessage: r.progressMessage,
    error: r.error,
    relativeTolerance: report?.relativeTolerance ?? null,
    counts: report?.counts ?? null,
    differences: (report?.steps ?? [])
      .filter((s) => s.outcome !== "identical")
      .map((s) => ({
        label: s.label,
        outcome: s.outcome,
        cacheKeyMatches: s.cacheKeyMatches,
        artifacts: s.artifacts
          .filter((a) => a.outcome !== "identical")
          .map((a) => ({ kind: a.kind, name: a.name, outcome: a.outcome, maxRelativeDifference: a.maxRelativeDifference ?? null, where: a.where ?? null, note: a.note ?? null })),
      })),
  };
}

function parseData(json: string | null): Record<string, unknown> | null {
  if (!json) return null;
  try {
    const v = JSON.parse(json) as unknown;
    return v && typeof v === "object" && !Array.isArray(v) ? (v as Record<string, unknown>) : { value: v };
  } catch {
    return null;
  }
}

/** Log lines of a run after `afterId`, with the structured details the terminal prints beside them. */
export function readLogs(runId: number, opts: { runStepId?: number; afterId?: number; limit?: number }): LogLine[] {
  return getStepLogs(getDb(), { runId, ...opts }).map((l) => ({
    id: l.id,
    runStepId: l.runStepId,
    at: l.at.getTime(),
    level: l.level,
    message: l.message,
    data: parseData(l.dataJson),
  }));
}

/** Intermediate results a run step recorded (a cache hit shows those of the step that computed it). */
export function readIntermediates(runStepId: number): IntermediateView[] {
  return listIntermediates(getDb(), runStepId).map((x) => ({
    kind: x.kind,
    index: x.index,
    label: x.label,
    hash: x.artifactHash,
    meta: x.meta,
    at: x.at.getTime(),
  }));
}

/** True while a run may still change. */
export function isLive(status: string): boolean {
  return status === "queued" || status === "running";
}

/** Each step type's settings documentation (name and the `.describe()` text with its unit), by step id. */
export function readParamDocs(stepIds: string[]): Record<string, Array<{ name: string; description: string }>> {
  const out: Record<string, Array<{ name: string; description: string }>> = {};
  for (const id of new Set(stepIds)) {
    try {
      out[id] = describeParams(getStep(id)).map((d) => ({ name: d.name, description: d.description }));
    } catch {
      out[id] = [];
    }
  }
  return out;
}
