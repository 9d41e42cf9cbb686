/**
 * react-query option factories: every client fetch of the control room is described here,
 * with its key, fetcher and live-polling rule.
 */
import { queryOptions } from "@tanstack/react-query";
import { decodeWire } from "./trace-wire";
import type { ArtifactOutline, DispersionWindowJson, LogLine, RunListPage, RunView, TraceHeaderWire } from "./view-types";

const live = (status: string | undefined) => status === "queued" || status === "running";

/** Poll interval while a run is queued or running, ms. */
export const LIVE_POLL_MS = 1_000;

/** Poll interval while a stop is pending (asked, the run not yet ended), ms: the stop shows within a poll. */
export const STOPPING_POLL_MS = 300;

/** How often the run page asks for a run: quicker while a stop is pending, not at all once it ended. */
export function runPollInterval(run: { status: string; cancelRequested?: boolean } | undefined): number | false {
  if (!run || !live(run.status)) return false;
  return run.cancelRequested ? STOPPING_POLL_MS : LIVE_POLL_MS;
}

/** An API failure with the server's message. */
export class ApiError extends Error {
  constructor(
    readonly status: number,
    message: string,
    readonly field?: string,
    readonly fields?: Record<string, string>,
  ) {
    super(message);
    this.name = "ApiError";
  }
}

async function failure(res: Response): Promise<ApiError> {
  const body = (await res.json().catch(() => null)) as { error?: { message?: string; field?: string; fields?: Record<string, string> } } | null;
  return new ApiError(res.status, body?.error?.message ?? `Request failed (${res.status}).`, body?.error?.field, body?.error?.fields);
}

/** GET a JSON resource. */
export async function getJson<T>(url: string): Promise<T> {
  const res = await fetch(url, { headers: { accept: "application/json" } });
  if (!res.ok) throw await failure(res);
  return (await res.json()) as T;
}

/** POST JSON, return the JSON answer. */
export async function postJson<T>(url: string, body: unknown): Promise<T> {
  const res = await fetch(url, { method: "POST", headers: { "content-type": "application/json" }, body: JSON.stringify(body) });
  if (!res.ok) throw await failure(res);
  return (await res.json()) as T;
}

async function getBinary<H>(url: string): Promise<{ header: H; payload: Float32Array }> {
  const res = await fetch(url);
  if (!res.ok) throw await failure(res);
  return decodeWire<H>(await res.arrayBuffer());
}


export const runQueries = {
  list: (query: string, initial?: RunListPage) =>
    queryOptions({
      queryKey: ["runs", query],
      queryFn: () => getJson<RunListPage>(`/api/runs${query}`),
      initialData: initial,
      refetchInterval: (q) => (q.state.data?.rows.some((r) => live(r.status)) ? LIVE_POLL_MS : 10_000),
    }),
  detail: (runId: number, initial?: RunView) =>
    queryOptions({
      queryKey: ["run", runId],
      queryFn: () => getJson<RunView>(`/api/runs/${runId}`),
      initialData: initial,
      refetchInterval: (q) => runPollInterval(q.state.data) || (q.state.data?.reproductions?.some((r) => r.verdict === "running") ? LIVE_POLL_MS : false),
    }),
  logs: (runId: number, runStepId: number | undefined, isLive: boolean) =>
    queryOptions({
      queryKey: ["logs", runId, runStepId ?? "all"],
      queryFn: () => getJson<{ lines: LogLine[]; lastId: number }>(`/api/runs/${runId}/logs${runStepId ? `?step=${runStepId}` : ""}`),
      refetchInterval: isLive ? LIVE_POLL_MS : false,
    }),
};

export const artifactQueries = {
  outline: (hash: string) =>
    queryOptions({
      queryKey: ["artifact", hash],
      queryFn: () => getJson<ArtifactOutline>(`/api/artifacts/${hash}`),
      staleTime: Infinity,
    }),
  traces: (hash: string, gatherId: string, maxSamples?: number) =>
    queryOptions({
      queryKey: ["traces", hash, gatherId, maxSamples ?? "full"],
      queryFn: () =>
        getBinary<TraceHeaderWire>(
          `/api/artifacts/${hash}/traces?gather=${encodeURIComponent(gatherId)}${maxSamples ? `&maxSamples=${maxSamples}` : ""}`,
        ),
      staleTime: Infinity,
    }),
  lines: (hash: string, gatherId: string) =>
    queryOptions({
      queryKey: ["lines", hash, gatherId],
      queryFn: () =>
        getJson<
          | { kind: "picks"; picks: Array<{ traceIndex: number; timeS: number; flagged: boolean; hand?: boolean }> }
          | { kind: "mutes"; lines: Array<{ role: string; timesS: number[] }> }
        >(`/api/artifacts/${hash}/lines?gather=${encodeURIComponent(gatherId)}`),
      staleTime: Infinity,
    }),
  dispersion: (hash: string, windowId?: string) =>
    queryOptions({
      queryKey: ["dispersion", hash, windowId ?? "first"],
      queryFn: () => getJson<DispersionWindowJson>(`/api/artifacts/${hash}/dispersion${windowId ? `?window=${encodeURIComponent(windowId)}` : ""}`),
      staleTime: Infinity,
    }),
  model: (hash: string) =>
    queryOptions({
      queryKey: ["model", hash],
      queryFn: () =>
        getBinary<{ nx: number; nz: number; spacingM: number; originX: number; originZ: number; fields: string[] }>(`/api/artifacts/${hash}/model`),
      staleTime: Infinity,
    }),
  positions: (hash: string) =>
    queryOptions({
      queryKey: ["positions", hash],
      queryFn: () => getJson<{ receiversX: number[]; sourcesX: number[] }>(`/api/artifacts/${hash}/positions`),
      staleTime: Infinity,
    }),
  snapshot: (hash: string, frame: number) =>
    queryOptions({
      queryKey: ["snapshot", hash, frame],
      queryFn: () =>
        getBinary<{ nx: number; nz: number; spacingM: number; originX: number; originZ: number; timeS: number; frame: number; frameCount: number }>(
          `/api/artifacts/${hash}/snapshots?frame=${frame}`,
        ),
      staleTime: Infinity,
    }),
  spectra: (hash: string) =>
    queryOptions({
      queryKey: ["spectra", hash],
      queryFn: () => getJson<{ frequenciesHz: number[]; gathers: Array<{ gatherId: string; mean: number[] }> }>(`/api/artifacts/${hash}/spectra`),
      staleTime: Infinity,
    }),
};
