/**
 * Shapes the control room's pages and API answers use (JSON-safe: times as epoch ms).
 * Shared by server reads, route handlers and client components.
 */
import type { Door, Role, RunStatus, StepStatus } from "@/db/schema";

export type { Door, Role, RunStatus, StepStatus };

export interface RunListItem {
  id: number;
  status: RunStatus;
  door: Door;
  startedBy: string;
  parentRunId: number | null;
  rerunFromStep: string | null;
  createdAt: number;
  startedAt: number | null;
  finishedAt: number | null;
  durationMs: number | null;
  pipelineName: string;
  pipelineVersion: number;
  datasetName: string;
  surveySlug: string | null;
  surveyName: string | null;
  stepsDone: number;
  stepsTotal: number;
  cacheHits: number;
  error: string | null;
  /** The latest review decision, or null when nobody has decided yet. */
  review: { decision: "approved" | "returned"; reviewer: string; at: number } | null;
}

export interface RunListPage {
  rows: RunListItem[];
  total: number;
  page: number;
  pageSize: number;
}

export interface StepView {
  id: number;
  position: number;
  label: string;
  stepId: string;
  stepVersion: number;
  status: StepStatus;
  progress: number;
  progressMessage: string | null;
  cacheHit: boolean;
  cacheSourceRunId: number | null;
  cacheKey: string | null;
  params: Record<string, unknown>;
  inputs: Record<string, string>;
  outputs: Record<string, string>;
  /** Where each input came from (label of the step that wrote it) and whether the pipeline file named it. */
  inputSources: Record<string, { from: string; explicit: boolean }>;
  summary: Record<string, unknown> | null;
  series: Array<{ name: string; xLabel: string; yLabel: string; points: Array<{ x: number; y: number; group?: string }> }>;
  error: string | null;
  startedAt: number | null;
  finishedAt: number | null;
  durationMs: number | null;
}

/** An intermediate result a step recorded while it ran (e.g. one iteration's model). */
export interface IntermediateView {
  kind: string;
  index: number;
  label: string | null;
  hash: string;
  meta: Record<string, unknown> | null;
  at: number;
}

export interface ReviewView {
  id: number;
  decision: "approved" | "returned";
  comment: string;
  reviewer: string;
  at: number;
}

export interface RunView extends RunListItem {
  datasetId: number;
  datasetHash: string;
  datasetFolder: string;
  profileName: string | null;
  pipelineVersionId: number;
  pipelineSource: string;
  startedByEmail: string | null;
  overrides: Record<string, Record<string, unknown>>;
  cancelRequested: boolean;
  steps: StepView[];
  rejectedFiles: Array<{ name: string; reason: string }>;
  childRunIds: number[];
  /** Parent, grandparent, ... (nearest first). */
  parentChain: Array<{ id: number; status: RunStatus; startedBy: string; createdAt: number; rerunFromStep: string | null }>;
  reviews: ReviewView[];
  /** Reproductions of this run, newest first (pipeline/reproduce.ts). */
  reproductions: ReproductionView[];
}

/** One reproduction of a run: who asked, its progress, and its verdict with what differed. */
export interface ReproductionView {
  id: number;
  requestedBy: string;
  startedAt: number;
  finishedAt: number | null;
  /** "stopped": still marked running but its process has gone (no verdict will come). */
  verdict: "running" | "stopped" | "identical" | "within-tolerance" | "different" | "failed";
  progress: number;
  progressMessage: string | null;
  error: string | null;
  relativeTolerance: number | null;
  counts: { identical: number; "within-tolerance": number; different: number; missing: number } | null;
  /** Steps whose artifacts are not all identical, with those artifacts. */
  differences: Array<{
    label: string;
    outcome: string;
    cacheKeyMatches: boolean;
    artifacts: Array<{ kind: string; name: string; outcome: string; maxRelativeDifference: number | null; where: string | null; note: string | null }>;
  }>;
}

export interface LogLine {
  id: number;
  runStepId: number | null;
  at: number;
  level: "debug" | "info" | "warn" | "error";
  message: string;
  /** Structured details logged with the line (file, table line, difference in m, ...), or null. */
  data: Record<string, unknown> | null;
}

/** An artifact's outline: enough to pick a gather or a model without its samples. */
export type ArtifactOutline =
  | {
      hash: string;
      kind: "gathers";
      gathers: Array<{ id: string; traceCount: number; sampleCount: number; sampleIntervalS: number; startTimeS: number; sourceX?: number | null }>;
    }
  | { hash: string; kind: "model"; nx: number; nz: number; spacingM: number; originX: number; originZ: number }
  | { hash: string; kind: "snapshots"; shotId: string; component: string; nx: number; nz: number; spacingM: number; originX: number; originZ: number; timesS: number[] }
  | { hash: string; kind: "picks"; method: string; count: number }
  | { hash: string; kind: "mutes"; count: number }
  | { hash: string; kind: "spectra"; gatherIds: string[]; frequencyCount: number }
  | { hash: string; kind: "json"; role: string; data: unknown }
  | { hash: string; kind: string };

/** JSON header of the binary trace answer (see app/lib/trace-wire.ts). */
export interface TraceHeaderWire {
  gatherId: string;
  traceCount: number;
  /** Samples per trace in the payload (after decimation). */
  sampleCount: number;
  /** Sample interval of the payload, s. */
  sampleIntervalS: number;
  startTimeS: number;
  /** Time decimation factor applied (1 = full resolution). */
  decimation: number;
  offsetsM: number[];
  receiverXM: number[];
  /** Channel number of each trace within its record (1-based). */
  channels: number[];
  sourceXM: number;
  dead: boolean[];
}

/** A dispersion curve as the browser holds it: points [frequency Hz, phase velocity m/s]. */
export interface DispersionCurveJson {
  mode: number;
  origin: "automatic" | "hand" | "modelled";
  points: Array<[number, number]>;
}

/** One window of a dispersion artifact (GET /api/artifacts/:hash/dispersion). */
export interface DispersionWindowJson {
  /** Frequency axis, Hz (image rows). */
  frequenciesHz: number[];
  /** Trial phase-velocity axis, m/s (image columns). */
  velocitiesMps: number[];
  normalisation: "per-frequency" | "none";
  windows: Array<{ id: string; centreX: number; receiverX0: number; receiverX1: number }>;
  window: {
    id: string;
    centreX: number;
    gatherIds: string[];
    traceCount: number;
    minOffsetM: number;
    maxOffsetM: number;
    /** Flat `[frequency][velocity]`, values in [0, 1]. */
    image: number[];
    picks: DispersionCurveJson[];
    modelled: DispersionCurveJson | null;
  };
}
