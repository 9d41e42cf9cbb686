/** Runs, their steps and logs: reads for the CLI and the control room, writes for the runner. */
import { and, asc, desc, eq, gt, gte, inArray, lte, sql, type SQL } from "drizzle-orm";
import type { Db } from "../client";
import {
  datasets,
  pipelineVersions,
  pipelines,
  profiles,
  rejectedFiles,
  runSteps,
  runs,
  stepLogs,
  surveys,
  users,
  type RunStatus,
} from "../schema";

export interface RunFilter {
  surveySlug?: string;
  pipelineName?: string;
  status?: RunStatus;
  /** Matches the starter's label (name or e-mail for users, OS user on the CLI). */
  startedBy?: string;
  from?: Date;
  to?: Date;
  sort?: "created" | "status" | "pipeline" | "duration";
  dir?: "asc" | "desc";
  /** 1-based. */
  page?: number;
  pageSize?: number;
}

const runColumns = {
  id: runs.id,
  status: runs.status,
  door: runs.door,
  startedByLabel: runs.startedByLabel,
  startedByUserId: runs.startedByUserId,
  parentRunId: runs.parentRunId,
  rerunFromStep: runs.rerunFromStep,
  createdAt: runs.createdAt,
  startedAt: runs.startedAt,
  finishedAt: runs.finishedAt,
  error: runs.error,
  pipelineName: pipelines.name,
  pipelineVersion: pipelineVersions.version,
  pipelineVersionId: pipelineVersions.id,
  datasetId: datasets.id,
  datasetName: datasets.name,
  datasetHash: datasets.contentHash,
  surveySlug: surveys.slug,
  surveyName: surveys.name,
};

export type RunRow = {
  id: number;
  status: RunStatus;
  door: "cli" | "web" | "watcher";
  startedByLabel: string;
  startedByUserId: number | null;
  parentRunId: number | null;
  rerunFromStep: string | null;
  createdAt: Date;
  startedAt: Date | null;
  finishedAt: Date | null;
  error: string | null;
  pipelineName: string;
  pipelineVersion: number;
  pipelineVersionId: number;
  datasetId: number;
  datasetName: string;
  datasetHash: string;
  surveySlug: string | null;
  surveyName: string | null;
  /** Steps done / total, and cache hits. */
  stepsDone: number;
  stepsTotal: number;
  cacheHits: number;
};

function baseRunQuery(db: Db) {
  return db
    .select(runColumns)
    .from(runs)
    .innerJoin(pipelineVersions, eq(pipelineVersions.id, runs.pipelineVersionId))
    .innerJoin(pipelines, eq(pipelines.id, pipelineVersions.pipelineId))
    .innerJoin(datasets, eq(datasets.id, runs.datasetId))
    .leftJoin(surveys, eq(surveys.id, datasets.surveyId));
}

function stepCounts(db: Db, runIds: number[]) {
  if (runIds.length === 0) return new Map<number, { done: number; total: number; hits: number }>();
  const rows = db
    .select({
      runId: runSteps.runId,
      total: sql<number>`count(*)`,
      done: sql<number>`sum(case when ${runSteps.status} = 'succeeded' then 1 else 0 end)`,
      hits: sql<number>`sum(case when ${runSteps.cacheHit} then 1 else 0 end)`,
    })
    .from(runSteps)
    .where(inArray(runSteps.runId, runIds))
    .groupBy(runSteps.runId)
    .all();
  return new Map(rows.map((r) => [r.runId, { done: Number(r.done), total: Number(r.total), hits: Number(r.hits) }]));
}

/** A page of runs, newest first by default. */
export function listRuns(db: Db, f: RunFilter = {}): { rows: RunRow[]; total: number } {
  const where: SQL[] = [];
  if (f.surveySlug) where.push(eq(surveys.slug, f.surveySlug));
  if (f.pipelineName) where.push(eq(pipelines.name, f.pipelineName));
  if (f.status) where.push(eq(runs.status, f.status));
  if (f.startedBy) where.push(eq(runs.startedByLabel, f.startedBy));
  if (f.from) where.push(gte(runs.createdAt, f.from));
  if (f.to) where.push(lte(runs.createdAt, f.to));
  const cond = where.length ? and(...where) : undefined;
  const pageSize = Math.min(Math.max(f.pageSize ?? 25, 1), 500);
  const page = Math.max(f.page ?? 1, 1);
  const dir = f.dir === "asc" ? asc : desc;
  const order =
    f.sort === "status"
      ? [dir(runs.status), desc(runs.id)]
      : f.sort === "pipeline"
        ? [dir(pipelines.name), desc(runs.id)]
        : f.sort === "duration"
          ? [dir(sql`coalesce(${runs.finishedAt}, unixepoch('subsec')*1000) - coalesce(${runs.startedAt}, ${runs.createdAt})`), desc(runs.id)]
          : [dir(runs.id)];
  const rows = baseRunQuery(db)
    .where(cond)
    .orderBy(...order)
    .limit(pageSize)
    .offset((page - 1) * pageSize)
    .all();
  const totalRow = db
    .select({ n: sql<number>`count(*)` })
    .from(runs)
    .innerJoin(pipelineVersions, eq(pipelineVersions.id, runs.pipelineVersionId))
    .innerJoin(pipelines, eq(pipelines.id, pipelineVersions.pipelineId))
    .innerJoin(datasets, eq(datasets.id, runs.datasetId))
    .leftJoin(surveys, eq(surveys.id, datasets.surveyId))
    .where(cond)
    .get();
  const counts = stepCounts(
    db,
    rows.map((r) => r.id),
  );
  return {
    rows: rows.map((r) => {
      const c = counts.get(r.id) ?? { done: 0, total: 0, hits: 0 };
      return { ...r, stepsDone: c.done, stepsTotal: c.total, cacheHits: c.hits } as RunRow;
    }),
    total: Number(totalRow?.n ?? 0),
  };
}

export type RunStepRow = typeof runSteps.$inferSelect;

export interface RunStepDetail extends Omit<RunStepRow, "paramsJson" | "inputsJson" | "outputsJson" | "summaryJson" | "seriesJson"> {
  params: Record<string, unknown>;
  inputs: Record<string, string>;
  outputs: Record<string, string>;
  summary: Record<string, unknown> | null;
  series: Array<{ name: string; xLabel: string; yLabel: string; points: Array<{ x: number; y: number; group?: string }> }>;
  /** The run that computed the outputs of a cache hit. */
  cacheSourceRunId: number | null;
  /**
   * Where each input came from: the label of the step that wrote it (or "field data",
   * "geometry table"), and whether the pipeline file named it (`input:`) or it was the latest value.
   */
  inputSources: Record<string, { from: string; explicit: boolean }>;
}

export interface RunDetail extends Omit<RunRow, "stepsDone" | "stepsTotal" | "cacheHits"> {
  overrides: Record<string, Record<string, unknown>>;
  cancelRequested: boolean;
  datasetFolder: string;
  profileName: string | null;
  pipelineSource: string;
  startedByName: string | null;
  startedByEmail: string | null;
  steps: RunStepDetail[];
  rejectedFiles: Array<{ name: string; reason: string }>;
  /** Runs that rerun this one. */
  childRunIds: number[];
}

/** A run with everything the run page and `tracewright show` need, or null. */
export function getRun(db: Db, id: number): RunDetail | null {
  const r = baseRunQuery(db).where(eq(runs.id, id)).get();
  if (!r) return null;
  const extra = db
    .select({
      overridesJson: runs.overridesJson,
      cancelRequested: runs.cancelRequested,
      folder: datasets.folderPath,
      profileName: profiles.name,
      source: pipelineVersions.sourceText,
      definitionJson: pipelineVersions.definitionJson,
      userName: users.name,
      userEmail: users.email,
    })
    .from(runs)
    .innerJoin(datasets, eq(datasets.id, runs.datasetId))
    .innerJoin(pipelineVersions, eq(pipelineVersions.id, runs.pipelineVersionId))
    .leftJoin(profiles, eq(profiles.id, datasets.profileId))
    .leftJoin(users, eq(users.id, runs.startedByUserId))
    .where(eq(runs.id, id))
    .get()!;
  const steps = db.select().from(runSteps).where(eq(runSteps.runId, id)).orderBy(asc(runSteps.position)).all();
  const sourceIds = steps.map((s) => s.cacheSourceStepId).filter((x): x is number => x !== null);
  const sourceRuns = new Map(
    sourceIds.length
      ? db
          .select({ id: runSteps.id, runId: runSteps.runId })
          .from(runSteps)
          .where(inArray(runSteps.id, sourceIds))
          .all()
          .map((x) => [x.id, x.runId])
      : [],
  );
  const children = db.select({ id: runs.id }).from(runs).where(eq(runs.parentRunId, id)).orderBy(asc(runs.id)).all();
  const definition = JSON.parse(extra.definitionJson) as { steps?: Array<{ label: string; inputs?: Record<string, string> }> };
  const named = new Map((definition.steps ?? []).map((d) => [d.label, d.inputs]));
  return {
    ...(r as Omit<RunRow, "stepsDone" | "stepsTotal" | "cacheHits">),
    overrides: JSON.parse(extra.overridesJson),
    cancelRequested: extra.cancelRequested,
    datasetFolder: extra.folder,
    profileName: extra.profileName,
    pipelineSource: extra.source,
    startedByName: extra.userName,
    startedByEmail: extra.userEmail,
    steps: steps.map(({ paramsJson, inputsJson, outputsJson, summaryJson, seriesJson, ...s }, i) => ({
      ...s,
      params: JSON.parse(paramsJson),
      inputs: JSON.parse(inputsJson),
      outputs: JSON.parse(outputsJson),
      summary: summaryJson ? JSON.parse(summaryJson) : null,
      series: seriesJson ? JSON.parse(seriesJson) : [],
      cacheSourceRunId: s.cacheSourceStepId ? (sourceRuns.get(s.cacheSourceStepId) ?? null) : null,
      inputSources: inputSourcesOf(steps, i, named.get(s.label)),
    })),
    rejectedFiles: db
      .select({ name: rejectedFiles.name, reason: rejectedFiles.reason })
      .from(rejectedFiles)
      .where(eq(rejectedFiles.runId, id))
      .all(),
    childRunIds: children.map((c) => c.id),
  };
}

const RUNNER_SOURCES: Record<string, string> = { fieldFiles: "field data", geometryTable: "geometry table" };

/** Where the inputs of step `i` came from: named in the file, else the latest earlier step that wrote that artifact. */
function inputSourcesOf(steps: RunStepRow[], i: number, named: Record<string, string> | undefined) {
  const out: Record<string, { from: string; explicit: boolean }> = {};
  for (const [slot, hash] of Object.entries(JSON.parse(steps[i].inputsJson) as Record<string, string>)) {
    if (named?.[slot]) {
      out[slot] = { from: named[slot], explicit: true };
      continue;
    }
    let from = RUNNER_SOURCES[slot] ?? "?";
    for (let k = i - 1; k >= 0; k--) {
      if ((JSON.parse(steps[k].outputsJson) as Record<string, string>)[slot] === hash) {
        from = steps[k].label;
        break;
      }
    }
    out[slot] = { from, explicit: false };
  }
  return out;
}

export type LogRow = typeof stepLogs.$inferSelect;

/** Log lines of a run (or one step), after `afterId` for streaming. */
export function getStepLogs(db: Db, q: { runId: number; runStepId?: number; afterId?: number; limit?: number }): LogRow[] {
  const where: SQL[] = [eq(stepLogs.runId, q.runId)];
  if (q.runStepId !== undefined) where.push(eq(stepLogs.runStepId, q.runStepId));
  if (q.afterId !== undefined) where.push(gt(stepLogs.id, q.afterId));
  return db
    .select()
    .from(stepLogs)
    .where(and(...where))
    .orderBy(asc(stepLogs.id))
    .limit(Math.min(q.limit ?? 1000, 5000))
    .all();
}

/** The latest succeeded step with this cache key, with its outputs. */
export function findCachedStep(db: Db, cacheKey: string) {
  return (
    db
      .select()
      .from(runSteps)
      .where(and(eq(runSteps.cacheKey, cacheKey), eq(runSteps.status, "succeeded")))
      .orderBy(desc(runSteps.id))
      .limit(20)
      .all()
  );
}

/** Run ids in a state, e.g. all "running" runs for interrupted-run detection. */
export function runsWithStatus(db: Db, status: RunStatus) {
  return db.select({ id: runs.id, hostPid: runs.hostPid, heartbeatAt: runs.heartbeatAt }).from(runs).where(eq(runs.status, status)).all();
}
