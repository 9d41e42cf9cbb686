/**
 * What a step may record while it runs, beyond its final outputs: intermediate results (each an
 * artifact at once, attached to the run step), points added to named series (written to the run
 * step live, throttled), and one checkpoint under the step's cache key (a resumed run with the
 * same cache key finds it). The runner makes one recorder per executed step and hands its
 * methods to the step through the StepContext.
 */
import type { Db } from "../db/client";
import { registerArtifact } from "../db/queries/artifacts";
import { findCheckpoint, recordIntermediateRow, saveCheckpointRow, writeStepSeries } from "../db/queries/intermediates";
import { hasArtifact, readArtifactSync, writeArtifact } from "./artifact-store";
import { AppError } from "./errors";
import type { StepContext, StepSeries } from "./step";

/** Live series are written to the database at most this often, ms (and always at a checkpoint and at the end). */
const SERIES_WRITE_EVERY_MS = 500;

type Recorder = Pick<StepContext, "recordIntermediate" | "extendSeries" | "saveCheckpoint" | "loadCheckpoint">;

export interface StepRecorder extends Recorder {
  /** The series recorded live, merged with the step's final ones: a final series replaces a live one of the same name. */
  mergeSeries(final: StepSeries[] | undefined): StepSeries[] | undefined;
  /** Writes pending live series now. */
  flush(): void;
}

function pointKey(p: { x: number; group?: string }): string {
  return `${p.group ?? ""}\u0000${p.x}`;
}

/**
 * A recorder for one executing run step. `existingSeriesJson` is what an earlier attempt of the
 * same run step wrote (a resumed step continues its curves; a point at an x already present in
 * its group replaces the old one, so a step that redoes an iteration does not draw it twice).
 * `ensureOwned` throws when the run is no longer ours (nothing more is written then).
 */
export function createStepRecorder(
  db: Db,
  opts: { runStepId: number; cacheKey: string; label: string; existingSeriesJson: string | null; ensureOwned: () => void },
): StepRecorder {
  const live = new Map<string, StepSeries>();
  for (const s of opts.existingSeriesJson ? (JSON.parse(opts.existingSeriesJson) as StepSeries[]) : []) live.set(s.name, s);
  let dirty = false;
  let lastWrite = 0;

  const flush = () => {
    if (!dirty) return;
    dirty = false;
    lastWrite = Date.now();
    writeStepSeries(db, opts.runStepId, JSON.stringify([...live.values()]));
  };

  const store = (value: unknown, kind: string, what: string): string => {
    if (value === undefined) throw new AppError("internal", `Step ${opts.label}: ${what} needs a value`);
    opts.ensureOwned();
    const written = writeArtifact(value);
    registerArtifact(db, { hash: written.hash, kind, path: written.relativePath, sizeBytes: written.sizeBytes, producedByRunStepId: opts.runStepId });
    return written.hash;
  };

  return {
    recordIntermediate(entry) {
      if (!entry.kind || !Number.isInteger(entry.index)) {
        throw new AppError("internal", `Step ${opts.label}: recordIntermediate needs a kind and a whole index (got ${JSON.stringify(entry.kind)}, ${entry.index})`);
      }
      const hash = store(entry.value, entry.kind, "recordIntermediate");
      recordIntermediateRow(db, {
        runStepId: opts.runStepId,
        kind: entry.kind,
        index: entry.index,
        label: entry.label ?? null,
        artifactHash: hash,
        meta: entry.meta ?? null,
      });
      return hash;
    },
    extendSeries(series, points) {
      const s = live.get(series.name) ?? { name: series.name, xLabel: series.xLabel, yLabel: series.yLabel, points: [] };
      const at = new Map(s.points.map((p, i) => [pointKey(p), i]));
      for (const p of points) {
        const point = p.group === undefined ? { x: p.x, y: p.y } : { x: p.x, y: p.y, group: p.group };
        const i = at.get(pointKey(point));
        if (i === undefined) {
          at.set(pointKey(point), s.points.length);
          s.points.push(point);
        } else s.points[i] = point;
      }
      live.set(series.name, s);
      dirty = true;
      if (Date.now() - lastWrite >= SERIES_WRITE_EVERY_MS) {
        opts.ensureOwned();
        flush();
      }
    },
    saveCheckpoint(value) {
      const hash = store(value, "checkpoint", "saveCheckpoint");
      saveCheckpointRow(db, opts.cacheKey, hash);
      flush();
    },
    loadCheckpoint() {
      const hash = findCheckpoint(db, opts.cacheKey);
      if (!hash || !hasArtifact(hash)) return null;
      return readArtifactSync(hash);
    },
    mergeSeries(final) {
      if (live.size === 0) return final;
      const merged = new Map(live);
      for (const s of final ?? []) merged.set(s.name, s);
      return [...merged.values()];
    },
    flush,
  };
}

/** What an in-memory recorder kept (for benches and step tests, where no run is recorded). */
export interface MemoryRecords {
  intermediates: Array<{ kind: string; index: number; label?: string; value: unknown; meta?: Record<string, unknown> }>;
  series: Map<string, StepSeries>;
  checkpoint: unknown | null;
}

/** The recording methods of a StepContext kept in memory (no database, no artifact files). */
export function memoryStepRecorder(): Recorder & { records: MemoryRecords } {
  const records: MemoryRecords = { intermediates: [], series: new Map(), checkpoint: null };
  return {
    records,
    recordIntermediate(entry) {
      records.intermediates.push(entry);
      return `memory-${records.intermediates.length}`;
    },
    extendSeries(series, points) {
      const s = records.series.get(series.name) ?? { ...series, points: [] };
      s.points.push(...points);
      records.series.set(series.name, s);
    },
    saveCheckpoint(value) {
      records.checkpoint = value;
    },
    loadCheckpoint() {
      return records.checkpoint;
    },
  };
}
