/**
 * Shot tasks by content hash without Redis: the split of a task argument into inline settings and
 * artifact hashes and back (byte for byte), the worker's memory cache (least recently used dropped
 * first), the settings from the environment and the task ids (BullMQ refuses ids with ":" and
 * integer ids: bullmq 6.7.0, dist/esm/classes/job.js, "Custom Id cannot contain :").
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { encodeArtifact } from "../../../pipeline/artifact-codec";
import { ArtifactCache, createPartWriter, joinParts, withPath, withoutPath } from "../../../pipeline/workers/task-exchange";
import { queueSettingsFromEnv, shotJobId } from "../../../pipeline/workers/shot-queue";
import { seededRandom } from "../../helpers/random";

let tmp: string;
const previous = process.env.TRACEWRIGHT_DATA_DIR;
beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-exchange-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
});
afterAll(() => {
  if (previous === undefined) delete process.env.TRACEWRIGHT_DATA_DIR;
  else process.env.TRACEWRIGHT_DATA_DIR = previous;
  fs.rmSync(tmp, { recursive: true, force: true });
});

function randomArray(n: number, seed: number): Float32Array {
  const r = seededRandom(seed);
  return Float32Array.from({ length: n }, () => r.uniform() - 0.5);
}

describe("task parts", () => {
  it("sends small settings inline and arrays by hash, writes a shared object once, and joins back to the same bytes", () => {
    const model = { nx: 30, nz: 10, spacingM: 0.5, vs: randomArray(300, 1), vp: randomArray(300, 2), rho: randomArray(300, 3) };
    const writer = createPartWriter();
    const args = [1, 2].map((k) => ({ model, observed: randomArray(500, 10 + k), measure: "least-squares", wantGradient: true, output: { intervalS: 0.0005, count: 50, startTimeS: 0 } }));
    const parts = args.map((a) => writer.split(a));
    expect(Object.keys(parts[0].inline).sort()).toEqual(["measure", "output", "wantGradient"]);
    expect(Object.keys(parts[0].byHash).sort()).toEqual(["model", "observed"]);
    expect(parts[1].byHash.model).toBe(parts[0].byHash.model);
    expect(parts[1].byHash.observed).not.toBe(parts[0].byHash.observed);
    // The model's bytes counted once: the encodings of one model and two observed arrays.
    expect(writer.bytesWritten).toBe(encodeArtifact(model).length + encodeArtifact(args[0].observed).length + encodeArtifact(args[1].observed).length);
    const cache = new ArtifactCache(1e9);
    const joined = parts.map((p) => joinParts(p, cache));
    joined.forEach((j, k) => expect(encodeArtifact(j)).toEqual(encodeArtifact(args[k])));
    // Three artifacts fetched, the model the second time from memory.
    expect([cache.fetches, cache.hits]).toEqual([3, 1]);
  });

  it("keeps non-finite numbers exact by sending them by hash (JSON has no NaN or Infinity)", () => {
    const parts = createPartWriter().split({ weights: [1, Number.POSITIVE_INFINITY], label: "x" });
    expect(Object.keys(parts.byHash)).toEqual(["weights"]);
    expect(joinParts(parts, new ArtifactCache(1e6)).weights).toEqual([1, Number.POSITIVE_INFINITY]);
  });

  it("drops the least recently used artifacts once the cache holds more bytes than its budget", () => {
    const writer = createPartWriter();
    const hashes = [0, 1, 2].map((k) => writer.split({ a: randomArray(1000, 20 + k) }).byHash.a);
    const size = encodeArtifact(randomArray(1000, 20)).length;
    const cache = new ArtifactCache(2 * size);
    cache.get(hashes[0]);
    cache.get(hashes[1]);
    cache.get(hashes[0]); // now hashes[1] is the least recently used
    cache.get(hashes[2]);
    expect(cache.keys()).toEqual([hashes[0], hashes[2]]);
    expect(cache.heldBytes).toBe(2 * size);
    expect(() => new ArtifactCache(-1)).toThrow(/budgetBytes must be at least 0, got -1/);
  });

  it("puts and takes values at a path without changing the argument", () => {
    const flag = new Int32Array(1);
    const arg = { options: { cancelFlag: flag, mode: "sh" }, model: { nx: 1 } };
    const without = withoutPath(arg, ["options", "cancelFlag"]);
    expect(without).toEqual({ options: { mode: "sh" }, model: { nx: 1 } });
    expect(arg.options.cancelFlag).toBe(flag);
    expect(without.model).toBe(arg.model);
    const other = new Int32Array(1);
    expect((withPath(without, ["options", "cancelFlag"], other).options as { cancelFlag: Int32Array }).cancelFlag).toBe(other);
  });
});

describe("queue settings and task ids", () => {
  it("takes the queue from TRACEWRIGHT_REDIS_URL and refuses what is not a redis URL or a sound number of tries", () => {
    expect(queueSettingsFromEnv({})).toBeNull();
    expect(queueSettingsFromEnv({ TRACEWRIGHT_REDIS_URL: "redis://10.0.0.5:6379" })).toEqual({ url: "redis://10.0.0.5:6379", attempts: undefined });
    expect(() => queueSettingsFromEnv({ TRACEWRIGHT_REDIS_URL: "10.0.0.5:6379" })).toThrow(/TRACEWRIGHT_REDIS_URL "10.0.0.5:6379": expected a redis:\/\/ or rediss:\/\/ URL/);
    expect(() => queueSettingsFromEnv({ TRACEWRIGHT_REDIS_URL: "redis://h", TRACEWRIGHT_QUEUE_ATTEMPTS: "0" })).toThrow(/TRACEWRIGHT_QUEUE_ATTEMPTS "0"/);
  });

  it("names run, step, batch and shot in the task id, never with a colon, and changes it when an input changes", () => {
    const parts = { inline: { measure: "least-squares" }, byHash: { model: "a".repeat(64) } };
    const id = shotJobId(12, "fwi: main", "stage-1/iteration-3/evaluation-2", "sp 07", parts);
    expect(id).toMatch(/^run-12\/fwi_main\/stage-1\/iteration-3\/evaluation-2\/sp_07\/[0-9a-f]{12}$/);
    expect(shotJobId(12, "fwi: main", "stage-1/iteration-3/evaluation-2", "sp 07", { ...parts, byHash: { model: "b".repeat(64) } })).not.toBe(id);
    expect(shotJobId(12, "fwi: main", "stage-1/iteration-3/evaluation-2", "sp 07", parts)).toBe(id);
  });
});
