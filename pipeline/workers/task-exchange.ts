/**
 * Shot tasks by content hash: the coordinator writes a task's large inputs (model arrays, observed
 * traces, wavelets) into the content-addressed artifact store and sends only their hashes with the
 * small settings; a worker fetches what it lacks from the store (the data folder on a shared file
 * system) and keeps it in a memory cache by hash. Results travel back the same way. Large arrays
 * never pass through Redis.
 *
 * The split is by top-level field of the task argument: a field holding small plain data (numbers,
 * strings, short lists) travels inline; a field holding typed arrays or much data becomes one
 * artifact. The model object is shared by every shot of a batch, so it is encoded and written once
 * per batch (the {@link PartWriter} remembers objects it has written).
 */
import { readArtifactBytes, writeArtifact } from "../artifact-store";
import { decodeArtifact } from "../artifact-codec";

/** A task argument as it travels: inline fields and fields by artifact hash. */
export interface TaskParts {
  /** Small plain fields, as JSON. */
  inline: Record<string, unknown>;
  /** Field name → artifact hash. */
  byHash: Record<string, string>;
}

/** Largest JSON text of a field sent inline, characters; larger ones go by hash. */
export const INLINE_LIMIT_CHARS = 2048;

function isSmallPlain(v: unknown): boolean {
  const walk = (x: unknown): boolean => {
    if (x === null || typeof x === "string" || typeof x === "boolean") return true;
    if (typeof x === "number") return Number.isFinite(x);
    if (Array.isArray(x)) return x.every(walk);
    if (typeof x === "object" && Object.getPrototypeOf(x) === Object.prototype) return Object.values(x as object).every((y) => y === undefined || walk(y));
    return false;
  };
  return walk(v) && JSON.stringify(v).length <= INLINE_LIMIT_CHARS;
}

/** Writes task fields as artifacts, each object once (by identity), and counts what it wrote. */
export interface PartWriter {
  split(arg: Record<string, unknown>): TaskParts;
  /** Bytes encoded into the store (each object counted once). */
  readonly bytesWritten: number;
}

export function createPartWriter(): PartWriter {
  const written = new WeakMap<object, string>();
  let bytesWritten = 0;
  return {
    split(arg) {
      const parts: TaskParts = { inline: {}, byHash: {} };
      for (const [key, value] of Object.entries(arg)) {
        if (value === undefined) continue;
        if (isSmallPlain(value)) {
          parts.inline[key] = value;
          continue;
        }
        const obj = value as object;
        let hash = written.get(obj);
        if (!hash) {
          const w = writeArtifact(value);
          hash = w.hash;
          bytesWritten += w.sizeBytes;
          written.set(obj, hash);
        }
        parts.byHash[key] = hash;
      }
      return parts;
    },
    get bytesWritten() {
      return bytesWritten;
    },
  };
}

/**
 * Decoded artifacts by hash, least recently used dropped first once their bytes exceed the budget.
 * Values are shared: callers must not change them (the pool copies arguments into its threads).
 */
export class ArtifactCache {
  private readonly entries = new Map<string, { value: unknown; bytes: number }>();
  private held = 0;
  /** Artifacts read from the store, and their bytes. */
  fetches = 0;
  fetchedBytes = 0;
  hits = 0;

  constructor(readonly budgetBytes: number) {
    if (!(budgetBytes >= 0)) throw new RangeError(`budgetBytes must be at least 0, got ${budgetBytes}`);
  }

  /** The decoded artifact, from memory or else from the store. */
  get(hash: string): unknown {
    const hit = this.entries.get(hash);
    if (hit) {
      // Re-insert: a Map iterates in insertion order, so the first key is the least recently used.
      this.entries.delete(hash);
      this.entries.set(hash, hit);
      this.hits++;
      return hit.value;
    }
    const bytes = readArtifactBytes(hash);
    const value = decodeArtifact(bytes, `artifact ${hash.slice(0, 12)}`);
    this.fetches++;
    this.fetchedBytes += bytes.length;
    this.entries.set(hash, { value, bytes: bytes.length });
    this.held += bytes.length;
    for (const [k, e] of this.entries) {
      if (this.held <= this.budgetBytes || k === hash) break;
      this.entries.delete(k);
      this.held -= e.bytes;
    }
    return value;
  }

  /** Bytes held. */
  get heldBytes(): number {
    return this.held;
  }

  /** Hashes held, least recently used first. */
  keys(): string[] {
    return [...this.entries.keys()];
  }
}

/** The task argument again, from its parts (fetched through `cache`). */
export function joinParts(parts: TaskParts, cache: ArtifactCache): Record<string, unknown> {
  const arg: Record<string, unknown> = { ...parts.inline };
  for (const [key, hash] of Object.entries(parts.byHash)) arg[key] = cache.get(hash);
  return arg;
}

/** A copy of `arg` without the value at `path` (objects along the path copied, the rest shared). */
export function withoutPath(arg: Record<string, unknown>, path: readonly string[]): Record<string, unknown> {
  if (path.length === 0) return arg;
  const [head, ...rest] = path;
  if (!(head in arg)) return arg;
  const copy = { ...arg };
  if (rest.length === 0) delete copy[head];
  else copy[head] = withoutPath(arg[head] as Record<string, unknown>, rest);
  return copy;
}

/** A copy of `arg` with `value` at `path` (objects along the path copied, the rest shared). */
export function withPath(arg: Record<string, unknown>, path: readonly string[], value: unknown): Record<string, unknown> {
  const [head, ...rest] = path;
  if (rest.length === 0) return { ...arg, [head]: value };
  return { ...arg, [head]: withPath((arg[head] ?? {}) as Record<string, unknown>, rest, value) };
}
