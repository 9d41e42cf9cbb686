/**
 * Speed of shot work on the Redis job queue on this machine (`tracewright bench --only queue`):
 * - the overhead of one task (queue round trip, input fetches, result write and read) on tiny shots
 *   sent one at a time, against the same shots on the local pool;
 * - the throughput of per-shot gradients on the demo-sized grid (245 × 57 cells at 0.25 m, 48
 *   receivers, 1201 samples) with 1, 2 and 3 `tracewright worker` processes (one task at a time each),
 *   against the local pool with 1 and 2 threads;
 * - how soon a cancel stops a running task on its worker;
 * - the bytes moved per shot and the coordinator's time per batch;
 * and from those figures a model of the speed-up on up to 32 machines ({@link speedupModel}).
 * Starts its own redis-server on a free port and its own workers, in a temporary data folder.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { buildModel, paintShapes } from "../kernels/fd/model-grid";
import { simulateShot } from "../kernels/fd/simulation";
import type { ShotGradientInput, ShotGradientOutput } from "../kernels/fwi/shot-gradient";
import type { ElasticModel } from "../types";
import { createWorkerPool } from "../workers/pool";
import { localShotExecutor } from "../workers/shot-executor";
import { encodeArtifact } from "../artifact-codec";
import { openShotQueue, queueShotExecutor, type QueueExecutorStats, type ShotQueue } from "../workers/shot-queue";
import { listWorkers } from "../workers/queue-worker";
import { redisServerAvailable, spawnWorkerProcess, startLocalRedis, type WorkerProcess } from "../workers/local-queue";

export interface QueueBench {
  cores: number;
  /** One-minute load average before and after (other work on the machine skews every figure). */
  loadAverage: [number, number];
  overhead: {
    shots: number;
    /** Per shot, ms: local pool wall; queue wall (submitted one at a time); worker compute on the queue. */
    localMs: number;
    queueMs: number;
    workerComputeMs: number;
    /** Per shot, ms: coordinator preparing inputs (encode, hash, write), worker fetching, worker writing the result, coordinator reading it. */
    prepareMs: number;
    fetchMs: number;
    writeMs: number;
    readMs: number;
    /** queueMs − workerComputeMs: what the queue adds to a shot. */
    addedMs: number;
  };
  throughput: {
    grid: { nx: number; nz: number };
    shots: number;
    /** Mean per-shot gradient time on one worker thread, s. */
    perShotS: number;
    rows: Array<{ where: string; processes: number; wallS: number; shotsPerS: number; speedup: number }>;
  };
  /** From abort to the running task failed as cancelled on its worker, ms. */
  cancelLatencyMs: number;
  bytes: {
    /** Model artifact (written once per batch). */
    modelBytes: number;
    /** Per shot: inputs written beside the model (observed, wavelet, weights), result read back. */
    perShotInputBytes: number;
    perShotResultBytes: number;
  };
  /** Coordinator wall time per batch (prepare, read results, sum gradients in shot order), s. */
  coordinatorPerBatchS: number;
  /** Coordinator CPU time per batch (the same, plus its Redis traffic), s: less swayed by other load than the wall time. */
  coordinatorCpuPerBatchS: number;
}

function shotSet(nShots: number, size: "tiny" | "demo"): { model: ElasticModel; tasks: Array<{ shotId: string; arg: ShotGradientInput }> } {
  const tiny = size === "tiny";
  const grid = tiny ? { originX: 0, originZ: 0, spacingM: 0.5, nx: 40, nz: 24 } : { originX: -7, originZ: 0, spacingM: 0.25, nx: 245, nz: 57 };
  const layers = tiny
    ? [{ topM: 0, vp: 450, vs: 200, rho: 1800, vsGradient: 8 }]
    : [
        { topM: 0, vp: 400, vs: 150, rho: 1750, vsGradient: 10 },
        { topM: 4, vp: 1600, vs: 190, rho: 1800, vsGradient: 10 },
      ];
  const model = buildModel(grid, layers);
  const truth = paintShapes(buildModel(grid, layers), [
    tiny
      ? { kind: "ellipse", centerXM: 12, centerZM: 2, radiusXM: 2, radiusZM: 2, vp: 450, vs: 230, rho: 1800 }
      : { kind: "ellipse", centerXM: 27, centerZM: 0, radiusXM: 3, radiusZM: 3.5, vp: 400, vs: 110, rho: 1600 },
  ]);
  const output = tiny ? { intervalS: 0.0005, count: 160, startTimeS: 0 } : { intervalS: 0.00025, count: 1201, startTimeS: 0 };
  const receiverX = tiny ? [2, 4, 6, 8, 10, 12, 14, 16] : Array.from({ length: 48 }, (_, c) => c);
  const simulation = { mode: "sh" as const, sourceKind: "force-y" as const, component: "y" as const, wavelet: { kind: "ricker" as const, peakHz: 30 }, pmlCells: tiny ? 8 : 20 };
  const tasks = Array.from({ length: nShots }, (_, s) => {
    const sx = tiny ? 1 + (s % 16) : -1 + 4 * (s % 13);
    const shot = { sourceX: sx, sourceZ: 0, receiverX, receiverZ: receiverX.map(() => 0) };
    const observed = simulateShot(truth, shot, { ...simulation, output }).traces;
    return { shotId: `shot-${String(s + 1).padStart(2, "0")}`, arg: { model, shot, simulation, output, observed, measure: "least-squares" as const, wantGradient: true } };
  });
  return { model, tasks };
}

/** Sums per-shot gradients in shot order, as waveform-inversion does; returns the time taken, ms. */
function sumInShotOrder(results: ShotGradientOutput[]): number {
  const t0 = performance.now();
  const n = results[0].gradient!.vs.length;
  const acc = { vp: new Float64Array(n), vs: new Float64Array(n), rho: new Float64Array(n), ill: new Float64Array(n) };
  for (const r of results) {
    for (let i = 0; i < n; i++) {
      acc.vp[i] += r.gradient!.vp[i];
      acc.vs[i] += r.gradient!.vs[i];
      acc.rho[i] += r.gradient!.rho[i];
      acc.ill[i] += r.illumination![i];
    }
  }
  return performance.now() - t0;
}

async function until(cond: () => Promise<boolean>, what: string, limitMs = 120_000): Promise<void> {
  const end = Date.now() + limitMs;
  while (!(await cond())) {
    if (Date.now() > end) throw new Error(`gave up waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 10));
  }
}

/** Runs the bench; null when redis-server is not installed. `log` hears progress. */
export async function benchQueue(log: (s: string) => void = () => undefined): Promise<QueueBench | null> {
  if (!redisServerAvailable()) return null;
  const loadBefore = os.loadavg()[0];
  const tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-queue-bench-"));
  const data = path.join(tmp, "data");
  fs.mkdirSync(data);
  const previousDataDir = process.env.TRACEWRIGHT_DATA_DIR;
  process.env.TRACEWRIGHT_DATA_DIR = data;
  const redis = await startLocalRedis();
  const workers: WorkerProcess[] = [];
  let queue: ShotQueue | undefined;
  let run = 0;
  const executor = (step: string, signal?: AbortSignal) => queueShotExecutor(queue!, { runId: 900_000 + ++run, step, signal });
  const addWorker = async () => {
    const w = spawnWorkerProcess({ url: redis.url, dataDir: data, concurrency: 1 });
    workers.push(w);
    await until(async () => (await listWorkers(await queue!.redis())).some((r) => r.pid === w.pid), `worker ${w.pid} to start`);
  };
  try {
    queue = await openShotQueue({ url: redis.url });
    // ---- overhead: tiny shots one at a time ----
    log("queue bench: task overhead on tiny shots...");
    const tiny = shotSet(24, "tiny");
    const pool1 = createWorkerPool(1);
    const local1 = localShotExecutor(() => pool1);
    await local1.runShots("shotGradientTask", tiny.tasks.slice(0, 3), { batch: "warm-up" });
    let t0 = performance.now();
    for (const t of tiny.tasks) await local1.runShot("shotGradientTask", t.arg, { batch: "overhead", shotId: t.shotId });
    const localMs = (performance.now() - t0) / tiny.tasks.length;
    await addWorker();
    await executor("warm-up").runShots("shotGradientTask", tiny.tasks.slice(0, 3), { batch: "warm-up" });
    const ov = executor("overhead");
    t0 = performance.now();
    for (const t of tiny.tasks) await ov.runShot("shotGradientTask", t.arg, { batch: "overhead", shotId: t.shotId });
    const queueMs = (performance.now() - t0) / tiny.tasks.length;
    const n = tiny.tasks.length;
    const per = (k: keyof QueueExecutorStats) => ov.stats[k] / n;
    const overhead = {
      shots: n, localMs, queueMs, workerComputeMs: per("workerComputeMs"), prepareMs: per("prepareMs"), fetchMs: per("workerFetchMs"),
      writeMs: per("workerWriteMs"), readMs: per("readMs"), addedMs: queueMs - per("workerComputeMs"),
    };

    // ---- throughput: demo-sized shots, 1 / 2 / 3 worker processes against the local pool ----
    const shots = 12;
    log(`queue bench: throughput, ${shots} demo-sized shots (245 × 57 cells, 1201 samples)...`);
    const demo = shotSet(shots, "demo");
    const rows: QueueBench["throughput"]["rows"] = [];
    t0 = performance.now();
    const localResults = await local1.runShots("shotGradientTask", demo.tasks, { batch: "local-1" });
    rows.push({ where: "local pool", processes: 1, wallS: (performance.now() - t0) / 1000, shotsPerS: 0, speedup: 1 });
    await pool1.close();
    const pool2 = createWorkerPool(2);
    t0 = performance.now();
    await localShotExecutor(() => pool2).runShots("shotGradientTask", demo.tasks, { batch: "local-2" });
    rows.push({ where: "local pool", processes: 2, wallS: (performance.now() - t0) / 1000, shotsPerS: 0, speedup: 0 });
    await pool2.close();
    let bytes: QueueBench["bytes"] = { modelBytes: 0, perShotInputBytes: 0, perShotResultBytes: 0 };
    let coordinatorPerBatchS = 0;
    let coordinatorCpuPerBatchS = 0;
    for (const count of [1, 2, 3]) {
      while (workers.length < count) await addWorker();
      // Each new worker compiles its kernel on its first task: warm them up outside the timing.
      await executor("warm-up").runShots("shotGradientTask", tiny.tasks.slice(0, 2 * count), { batch: "warm-up" });
      const ex = executor(`throughput-${count}`);
      const cpu0 = process.cpuUsage();
      t0 = performance.now();
      const results = await ex.runShots("shotGradientTask", demo.tasks, { batch: "stage-1/start" });
      rows.push({ where: "queue workers", processes: count, wallS: (performance.now() - t0) / 1000, shotsPerS: 0, speedup: 0 });
      if (count === 1) {
        const sumMs = sumInShotOrder(results);
        const modelBytes = encodeArtifact(demo.model).length;
        bytes = {
          modelBytes,
          perShotInputBytes: (ex.stats.inputBytesWritten - modelBytes) / shots,
          perShotResultBytes: ex.stats.resultBytesRead / shots,
        };
        coordinatorPerBatchS = (ex.stats.prepareMs + ex.stats.readMs + sumMs) / 1000;
        // This process runs nothing else meanwhile (the pools are closed): its CPU time is the coordinator's.
        const cpu = process.cpuUsage(cpu0);
        coordinatorCpuPerBatchS = (cpu.user + cpu.system) / 1e6 + sumMs / 1000;
        // The same bytes as the local pool's (checked by the tests too).
        if (results.some((r, k) => r.misfit !== localResults[k].misfit)) throw new Error("queue and local misfits differ");
      }
    }
    for (const r of rows) {
      r.shotsPerS = shots / r.wallS;
      r.speedup = rows[0].wallS / r.wallS;
    }
    const perShotS = rows[0].wallS / shots;

    // ---- cancel latency ----
    log("queue bench: cancel latency...");
    const controller = new AbortController();
    const cancelEx = executor("cancel", controller.signal);
    const slow = shotSet(1, "demo").tasks;
    const pending = cancelEx.runShots("shotGradientTask", slow, { batch: "cancel", signal: controller.signal });
    pending.catch(() => undefined);
    const live = new Set(workers.map((w) => w.pid));
    let jobId = "";
    await until(async () => {
      const busy = (await listWorkers(await queue!.redis())).find((r) => live.has(r.pid) && r.currentTasks.length > 0);
      jobId = busy?.currentTasks[0] ?? "";
      return Boolean(busy);
    }, "a worker to start the slow task");
    await new Promise((r) => setTimeout(r, 300));
    const aborted = performance.now();
    controller.abort();
    await until(async () => (await queue!.queue.getJobState(jobId)) === "failed", "the cancelled task to stop", 60_000);
    const cancelLatencyMs = performance.now() - aborted;

    return {
      cores: os.availableParallelism?.() ?? os.cpus().length,
      loadAverage: [loadBefore, os.loadavg()[0]],
      overhead,
      throughput: { grid: { nx: 245, nz: 57 }, shots, perShotS, rows },
      cancelLatencyMs,
      bytes,
      coordinatorPerBatchS,
      coordinatorCpuPerBatchS,
    };
  } finally {
    await Promise.all(workers.map((w) => w.stop("SIGTERM")));
    await queue?.close();
    await redis.stop();
    if (previousDataDir === undefined) delete process.env.TRACEWRIGHT_DATA_DIR;
    else process.env.TRACEWRIGHT_DATA_DIR = previousDataDir;
    fs.rmSync(tmp, { recursive: true, force: true });
  }
}

/** The modelled iteration time and speed-up on `machines` machines (see DEVELOPERS.md, "Shot work beyond one machine"). */
export function speedupModel(
  f: { perShotS: number; overheadS: number; coordinatorS: number; modelBytes: number; perShotBytes: number; shareBytesPerS: number },
  shots: number,
  machines: number,
): { iterationS: number; speedup: number } {
  // One batch: the coordinator's own time, rounds of shots (each shot plus what the queue adds), and
  // the bytes through the shared store (every machine fetches the model, each shot its inputs and result).
  const rounds = Math.ceil(shots / machines);
  const io = (machines * f.modelBytes + shots * f.perShotBytes) / f.shareBytesPerS;
  const iterationS = f.coordinatorS + rounds * (f.perShotS + f.overheadS) + io;
  const one = f.coordinatorS + shots * f.perShotS;
  return { iterationS, speedup: one / iterationS };
}

export function formatQueueBench(r: QueueBench | null): string[] {
  if (!r) return ["queue: skipped, no redis-server on the PATH (Debian: apt-get install redis-server)"];
  const o = r.overhead;
  const t = r.throughput;
  const lines = [
    `queue (this machine: ${r.cores} cores, load average ${r.loadAverage[0].toFixed(1)} before and ${r.loadAverage[1].toFixed(1)} after; redis-server and the workers on it):`,
    `  task overhead, tiny shots one at a time (${o.shots}): local pool ${o.localMs.toFixed(1)} ms/shot, queue ${o.queueMs.toFixed(1)} ms/shot of which the worker computed ${o.workerComputeMs.toFixed(1)} ms`,
    `    added by the queue ${o.addedMs.toFixed(1)} ms/shot: coordinator prepares ${o.prepareMs.toFixed(2)} ms, worker fetches ${o.fetchMs.toFixed(2)} ms, writes ${o.writeMs.toFixed(2)} ms, coordinator reads ${o.readMs.toFixed(2)} ms, the rest Redis round trips`,
    `  throughput, ${t.shots} per-shot gradients on ${t.grid.nx} × ${t.grid.nz} cells (${t.perShotS.toFixed(2)} s per shot on one thread):`,
  ];
  for (const row of t.rows) {
    lines.push(`    ${row.where.padEnd(14)} ${String(row.processes).padStart(2)} ${row.where === "local pool" ? "threads  " : "processes"}  ${row.wallS.toFixed(1).padStart(6)} s  ${row.shotsPerS.toFixed(2)} shots/s  ×${row.speedup.toFixed(2)}`);
  }
  lines.push(`    (${r.cores} cores: more than ${r.cores} workers on this machine cannot add speed, they share the cores)`);
  lines.push(`  cancel: the running task stopped on its worker ${r.cancelLatencyMs.toFixed(0)} ms after the abort`);
  lines.push(
    `  bytes per batch: model ${(r.bytes.modelBytes / 1e3).toFixed(0)} kB once, per shot ${(r.bytes.perShotInputBytes / 1e3).toFixed(0)} kB of inputs and ${(r.bytes.perShotResultBytes / 1e3).toFixed(0)} kB of result; coordinator ${(r.coordinatorPerBatchS * 1000).toFixed(0)} ms wall, ${(r.coordinatorCpuPerBatchS * 1000).toFixed(0)} ms CPU per batch of ${t.shots}`,
  );
  const f = {
    perShotS: t.perShotS,
    overheadS: o.addedMs / 1000,
    coordinatorS: r.coordinatorCpuPerBatchS,
    modelBytes: r.bytes.modelBytes,
    perShotBytes: r.bytes.perShotInputBytes + r.bytes.perShotResultBytes,
    shareBytesPerS: 110e6,
  };
  lines.push(`  modelled speed-up (DEVELOPERS.md): ${t.perShotS.toFixed(2)} s per shot, ${o.addedMs.toFixed(0)} ms added per task, coordinator CPU per shot, shared store at 110 MB/s:`);
  for (const shots of [13, 48]) {
    const cells = [1, 2, 4, 8, 16, 32].map((m) => `${m}: ×${speedupModel({ ...f, coordinatorS: (f.coordinatorS * shots) / t.shots }, shots, m).speedup.toFixed(1)}`);
    lines.push(`    ${shots} shots on 1, 2, 4, ... 32 machines: ${cells.join(", ")}`);
  }
  return lines;
}
