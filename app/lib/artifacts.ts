/**
 * Server-side access to artifacts for the control room: outlines, gathers as compact binary,
 * models, snapshots, picks, mutes and spectra. Artifacts are immutable (content-addressed),
 * so decoded values are kept in a small in-process cache.
 */
import "server-only";
import { getDb } from "@/db/client";
import { isArtifactRecorded } from "@/db/queries/artifacts";
import { readArtifact } from "@/pipeline/artifact-store";
import { AppError } from "@/pipeline/errors";
import type { DispersionSet, ElasticModel, GatherSet, JsonDocument, MuteSet, PickSet, SnapshotSet, SpectrumSet } from "@/pipeline/types";
import { decimatePeaks, encodeWire } from "./trace-wire";
import type { ArtifactOutline, DispersionWindowJson, TraceHeaderWire } from "./view-types";

const CACHE_SIZE = 6;
const cache = new Map<string, unknown>();

/** Decoded artifact by hash (must be recorded in the artifacts table). */
export async function loadArtifact(hash: string): Promise<unknown> {
  if (!/^[0-9a-f]{64}$/.test(hash)) {
    throw new AppError("bad-input", `"${hash}" is not an artifact hash (64 hex digits expected).`, { field: "hash" });
  }
  const hit = cache.get(hash);
  if (hit !== undefined) {
    cache.delete(hash);
    cache.set(hash, hit);
    return hit;
  }
  if (!isArtifactRecorded(getDb(), hash)) throw new AppError("not-found", `No artifact ${hash.slice(0, 12)}… is recorded.`, { field: "hash" });
  const value = await readArtifact(hash);
  cache.set(hash, value);
  while (cache.size > CACHE_SIZE) cache.delete(cache.keys().next().value as string);
  return value;
}

function kindOf(value: unknown): string {
  return typeof value === "object" && value !== null && "kind" in value ? String((value as { kind: unknown }).kind) : "unknown";
}

/** What an artifact holds, without the samples. */
export async function artifactOutline(hash: string): Promise<ArtifactOutline> {
  const value = await loadArtifact(hash);
  const kind = kindOf(value);
  switch (kind) {
    case "gathers": {
      const g = value as GatherSet;
      return {
        hash,
        kind: "gathers",
        gathers: g.gathers.map((x) => ({
          id: x.id,
          traceCount: x.traces.length,
          sampleCount: x.sampleCount,
          sampleIntervalS: x.sampleIntervalS,
          startTimeS: x.startTimeS,
          sourceX: x.traces[0]?.sourceX ?? null,
        })),
      };
    }
    case "model": {
      const m = value as ElasticModel;
      return { hash, kind: "model", nx: m.nx, nz: m.nz, spacingM: m.spacingM, originX: m.originX, originZ: m.originZ };
    }
    case "snapshots": {
      const s = value as SnapshotSet;
      return { hash, kind: "snapshots", shotId: s.shotId, component: s.component, nx: s.nx, nz: s.nz, spacingM: s.spacingM, originX: s.originX, originZ: s.originZ, timesS: s.timesS };
    }
    case "picks": {
      const p = value as PickSet;
      return { hash, kind: "picks", method: p.method, count: p.picks.length };
    }
    case "mutes":
      return { hash, kind: "mutes", count: (value as MuteSet).lines.length };
    case "spectra": {
      const s = value as SpectrumSet;
      return { hash, kind: "spectra", gatherIds: s.gathers.map((g) => g.gatherId), frequencyCount: s.frequenciesHz.length };
    }
    case "json": {
      const j = value as JsonDocument;
      return { hash, kind: "json", role: j.role, data: j.data };
    }
    default:
      return { hash, kind };
  }
}

async function loadAs<T>(hash: string, kind: string): Promise<T> {
  const value = await loadArtifact(hash);
  const actual = kindOf(value);
  if (actual !== kind) throw new AppError("bad-input", `Artifact ${hash.slice(0, 12)}… holds ${actual}, not ${kind}.`, { field: "hash" });
  return value as T;
}

/**
 * One gather as binary (see trace-wire.ts). With `maxSamples`, traces longer than that are
 * decimated in time by the smallest whole factor that fits, keeping peaks.
 */
export async function gatherWire(hash: string, gatherId: string | undefined, maxSamples?: number): Promise<Uint8Array> {
  const set = await loadAs<GatherSet>(hash, "gathers");
  if (set.gathers.length === 0) throw new AppError("not-found", "This artifact holds no gathers.");
  const gather = gatherId === undefined ? set.gathers[0] : set.gathers.find((g) => g.id === gatherId);
  if (!gather) {
    throw new AppError("not-found", `No gather "${gatherId}" here. Gathers: ${set.gathers.map((g) => g.id).join(", ")}.`, { field: "gather" });
  }
  const traces = gather.traces.length;
  const factor = maxSamples && gather.sampleCount > maxSamples ? Math.ceil(gather.sampleCount / maxSamples) : 1;
  let data = gather.data;
  if (factor > 1) {
    data = new Float32Array(traces * Math.ceil(gather.sampleCount / factor));
    decimatePeaks(gather.data, traces, gather.sampleCount, factor, data);
  }
  const header: TraceHeaderWire = {
    gatherId: gather.id,
    traceCount: traces,
    sampleCount: factor > 1 ? Math.ceil(gather.sampleCount / factor) : gather.sampleCount,
    sampleIntervalS: gather.sampleIntervalS * factor,
    startTimeS: gather.startTimeS,
    decimation: factor,
    offsetsM: gather.traces.map((t) => t.offset),
    receiverXM: gather.traces.map((t) => t.receiverX),
    channels: gather.traces.map((t) => t.channel),
    sourceXM: gather.traces[0]?.sourceX ?? 0,
    dead: gather.traces.map((t) => t.dead),
  };
  return encodeWire(header, [data]);
}

/** Receiver and source positions of every gather of a gathers artifact (for marking a model). */
export async function acquisitionPositions(hash: string): Promise<{ receiversX: number[]; sourcesX: number[] }> {
  const set = await loadAs<GatherSet>(hash, "gathers");
  const rx = new Set<number>();
  const sx = new Set<number>();
  for (const g of set.gathers) for (const t of g.traces) {
    rx.add(t.receiverX);
    sx.add(t.sourceX);
  }
  return { receiversX: [...rx].sort((a, b) => a - b), sourcesX: [...sx].sort((a, b) => a - b) };
}

/** A model as binary: header with the grid, then vs, vp, rho each flat `[z][x]`. */
export async function modelWire(hash: string): Promise<Uint8Array> {
  const m = await loadAs<ElasticModel>(hash, "model");
  return encodeWire(
    { nx: m.nx, nz: m.nz, spacingM: m.spacingM, originX: m.originX, originZ: m.originZ, fields: ["vs", "vp", "rho"] },
    [m.vs, m.vp, m.rho],
  );
}

/** One snapshot frame as binary. */
export async function snapshotWire(hash: string, frame: number): Promise<Uint8Array> {
  const s = await loadAs<SnapshotSet>(hash, "snapshots");
  if (!Number.isInteger(frame) || frame < 0 || frame >= s.timesS.length) {
    throw new AppError("bad-input", `frame must be 0 to ${s.timesS.length - 1}, got ${frame}.`, { field: "frame" });
  }
  const n = s.nx * s.nz;
  return encodeWire(
    { nx: s.nx, nz: s.nz, spacingM: s.spacingM, originX: s.originX, originZ: s.originZ, timeS: s.timesS[frame], frame, frameCount: s.timesS.length },
    [s.frames.subarray(frame * n, (frame + 1) * n)],
  );
}

/** Picks and mute lines of one gather, JSON. */
export async function gatherLines(hash: string, gatherId: string) {
  const value = await loadArtifact(hash);
  const kind = kindOf(value);
  if (kind === "picks") {
    const p = value as PickSet;
    return {
      kind: "picks" as const,
      picks: p.picks.filter((x) => x.gatherId === gatherId).map((x) => ({ traceIndex: x.traceIndex, timeS: x.timeS, flagged: x.flagged, hand: x.origin === "hand" })),
    };
  }
  if (kind === "mutes") {
    const m = value as MuteSet;
    return {
      kind: "mutes" as const,
      lines: m.lines.filter((l) => l.gatherId === gatherId).map((l) => ({ role: l.role, timesS: Array.from(l.timesS) })),
    };
  }
  throw new AppError("bad-input", `Artifact ${hash.slice(0, 12)}… holds ${kind}; lines come from picks or mutes.`, { field: "hash" });
}

/**
 * One window of a dispersion artifact, JSON: the axes, the image (flat `[frequency][velocity]`,
 * rounded to 4 decimals: values lie in [0, 1]), the picked curves and the modelled one, and the
 * list of windows to choose from. Without `windowId`, the first window.
 */
export async function dispersionJson(hash: string, windowId?: string): Promise<DispersionWindowJson> {
  const d = await loadAs<DispersionSet>(hash, "dispersion");
  const w = windowId === undefined ? d.windows[0] : d.windows.find((x) => x.id === windowId);
  if (!w) throw new AppError("not-found", `No window "${windowId}" here. Windows: ${d.windows.map((x) => x.id).join(", ")}.`, { field: "window" });
  const curve = (c: DispersionSet["windows"][number]["picks"][number]) => ({
    mode: c.mode,
    origin: c.origin,
    points: Array.from(c.frequenciesHz, (f, i) => [f, c.velocitiesMps[i]] as [number, number]),
  });
  return {
    frequenciesHz: Array.from(d.frequenciesHz),
    velocitiesMps: Array.from(d.velocitiesMps),
    normalisation: d.normalisation,
    windows: d.windows.map((x) => ({ id: x.id, centreX: x.centreX, receiverX0: x.receiverX0, receiverX1: x.receiverX1 })),
    window: {
      id: w.id,
      centreX: w.centreX,
      gatherIds: w.gatherIds,
      traceCount: w.traceCount,
      minOffsetM: w.minOffsetM,
      maxOffsetM: w.maxOffsetM,
      image: Array.from(w.image, (v) => Math.round(v * 1e4) / 1e4),
      picks: w.picks.map(curve),
      modelled: w.modelled ? curve(w.modelled) : null,
    },
  };
}

/** Mean amplitude spectrum of each gather (or one), JSON. */
export async function spectraJson(hash: string, gatherId?: string) {
  const s = await loadAs<SpectrumSet>(hash, "spectra");
  const gathers = gatherId ? s.gathers.filter((g) => g.gatherId === gatherId) : s.gathers;
  return { frequenciesHz: Array.from(s.frequenciesHz), gathers: gathers.map((g) => ({ gatherId: g.gatherId, mean: Array.from(g.mean) })) };
}
