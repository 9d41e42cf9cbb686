/** The worker pool runs TypeScript tasks under vitest and moves buffers instead of copying them. */
import { afterAll, describe, expect, it } from "vitest";
import { createWorkerPool } from "../../../pipeline/workers/pool";

const pool = createWorkerPool(2);
afterAll(() => pool.close());

describe("worker pool", { timeout: 60_000 }, () => {
  it("runs a task in a worker with the input buffer transferred", async () => {
    const samples = new Float32Array(1000).fill(0.5);
    const result = await pool.run("sumSamples", { samples }, { transfer: [samples.buffer as ArrayBuffer] });
    expect(result).toEqual({ sum: 500, length: 1000 });
    // Transferred, not copied: the caller's buffer is detached.
    expect(samples.byteLength).toBe(0);
  });

  it("runs two tasks at the same time: each waits for a flag only the other sets", async () => {
    // Shared memory, not timing: run one after the other, the first task would never see the
    // second's flag and would give up after its limit (met: false).
    const flags = new Int32Array(new SharedArrayBuffer(8));
    const [a, b] = await Promise.all([
      pool.run("meetPeer", { flags, mine: 0, peer: 1, limitMs: 30_000 }),
      pool.run("meetPeer", { flags, mine: 1, peer: 0, limitMs: 30_000 }),
    ]);
    expect([a.met, b.met]).toEqual([true, true]);
    expect(Array.from(flags)).toEqual([1, 1]);
  });

  it("returns results moved back from the worker", async () => {
    const jobs = [1, 2, 3, 4].map((f) => pool.run("scaleSamples", { samples: new Float32Array([1, 2, 3]), factor: f }));
    const out = await Promise.all(jobs);
    expect(out.map((o) => Array.from(o as Float32Array))).toEqual([
      [1, 2, 3],
      [2, 4, 6],
      [3, 6, 9],
      [4, 8, 12],
    ]);
    expect(pool.size).toBe(2);
  });
});
