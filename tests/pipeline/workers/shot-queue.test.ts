/**
 * Shot tasks on the Redis job queue (BullMQ) against the local worker pool, on a tiny SH model:
 * the same per-shot results and the same summed gradient bit for bit with 0 (local), 1 and 2 queue
 * workers; a worker killed in the middle of a task (the task goes to another worker through the
 * queue's stalled-job check, the result is unchanged and each shot counts once); a task that fails on
 * every try fails the batch naming the shot; a cancel stops a running task on its worker; the
 * forward-model step gives the same synthetic artifact through the queue as locally.
 *
 * The reference is the local pool: the solver is deterministic (same WebAssembly kernel, same
 * float32 operations in the same order), so "the same" means the same bytes, not a tolerance.
 * A real redis-server (Debian's package) starts on a free port for this file and is stopped after.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { buildModel } from "../../../pipeline/kernels/fd/model-grid";
import { simulateShot } from "../../../pipeline/kernels/fd/simulation";
import type { ShotGradientInput, ShotGradientOutput } from "../../../pipeline/kernels/fwi/shot-gradient";
import { encodeArtifact } from "../../../pipeline/artifact-codec";
import { sha256Hex } from "../../../pipeline/hash";
import { forwardModelParams, forwardModelStep } from "../../../pipeline/steps/forward-model";
import { waveformInversionParams, waveformInversionStep } from "../../../pipeline/steps/waveform-inversion";
import type { ElasticModel, GatherSet } from "../../../pipeline/types";
import { createWorkerPool, type WorkerPool } from "../../../pipeline/workers/pool";
import { localShotExecutor, type ShotExecutor } from "../../../pipeline/workers/shot-executor";
import { listRunShotTasks, openShotQueue, queueShotExecutor, type ShotQueue } from "../../../pipeline/workers/shot-queue";
import { listWorkers } from "../../../pipeline/workers/queue-worker";
import { redisServerAvailable, spawnWorkerProcess, startLocalRedis, type LocalRedis, type WorkerProcess } from "../../../pipeline/workers/local-queue";
import { makeStepContext } from "../../helpers/step-context";

const haveRedis = redisServerAvailable();
if (!haveRedis) console.warn("shot-queue tests skipped: no redis-server on the PATH (Debian: apt-get install redis-server)");

/** A worker's lock in these tests, ms: a killed worker's task returns to the queue after about this long. */
const LOCK_MS = 1500;

const grid = { originX: 0, originZ: 0, spacingM: 0.5, nx: 40, nz: 24 };
const model = buildModel(grid, [{ topM: 0, vp: 450, vs: 200, rho: 1800, vsGradient: 8 }]);
const truth: ElasticModel = { ...model, vs: model.vs.map((v, k) => (k % 40 > 20 && k / 40 < 8 ? v + 30 : v)) };
const receiverX = [2, 4, 6, 8, 10, 12, 14, 16];
const simulation = { mode: "sh" as const, sourceKind: "force-y" as const, component: "y" as const, wavelet: { kind: "ricker" as const, peakHz: 30 }, pmlCells: 8 };
const sources = [1, 6, 11, 17];

function shotTasks(m: ElasticModel, count: number): Array<{ shotId: string; arg: ShotGradientInput }> {
  const output = { intervalS: 0.0005, count, startTimeS: 0 };
  return sources.map((sx, k) => {
    const shot = { sourceX: sx, sourceZ: 0, receiverX, receiverZ: receiverX.map(() => 0) };
    const observed = simulateShot(truth, shot, { ...simulation, output }).traces;
    return { shotId: `shot-${k + 1}`, arg: { model: m, shot, simulation, output, observed, measure: "least-squares", wantGradient: true } };
  });
}

/** The sum over shots in shot order, as waveform-inversion sums them. */
function summed(results: ShotGradientOutput[]) {
  const n = model.nx * model.nz;
  const vs = new Float64Array(n);
  let misfit = 0;
  for (const r of results) {
    misfit += r.misfit;
    for (let i = 0; i < n; i++) vs[i] += r.gradient!.vs[i];
  }
  return { misfit, vs };
}

const bytes = (a: ArrayBufferView) => Buffer.from(a.buffer, a.byteOffset, a.byteLength);

function expectSameResults(a: ShotGradientOutput[], b: ShotGradientOutput[]) {
  expect(b.length).toBe(a.length);
  a.forEach((r, k) => {
    expect(b[k].misfit).toBe(r.misfit);
    expect(bytes(b[k].synthetic)).toEqual(bytes(r.synthetic));
    expect(bytes(b[k].gradient!.vs)).toEqual(bytes(r.gradient!.vs));
    expect(bytes(b[k].gradient!.rho)).toEqual(bytes(r.gradient!.rho));
    expect(bytes(b[k].illumination!)).toEqual(bytes(r.illumination!));
  });
  expect(summed(b).misfit).toBe(summed(a).misfit);
  expect(bytes(summed(b).vs)).toEqual(bytes(summed(a).vs));
}

async function until(cond: () => boolean | Promise<boolean>, what: string, limitMs = 60_000) {
  const end = Date.now() + limitMs;
  while (!(await cond())) {
    if (Date.now() > end) throw new Error(`gave up waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 20));
  }
}

describe.skipIf(!haveRedis)("shot tasks on the job queue", () => {
  let redis: LocalRedis;
  let tmp: string;
  let pool: WorkerPool;
  let queue: ShotQueue;
  let local: ShotExecutor;
  const workers: WorkerProcess[] = [];
  const tasks = shotTasks(model, 160);
  let reference: ShotGradientOutput[];

  const startWorker = async () => {
    const w = spawnWorkerProcess({ url: redis.url, dataDir: path.join(tmp, "data"), lockMs: LOCK_MS });
    workers.push(w);
    await until(async () => (await listWorkers(await queue.redis())).some((r) => r.pid === w.pid), `worker ${w.pid} to register (${w.output()})`);
    return w;
  };
  /** Starts a worker unless one of ours still runs (so each test also runs alone). */
  const ensureWorker = async () => {
    if (!workers.some((w) => w.alive())) await startWorker();
  };
  const onQueue = (step: string, signal?: AbortSignal) => queueShotExecutor(queue, { runId: 7, step, signal });

  beforeAll(async () => {
    tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-queue-"));
    fs.mkdirSync(path.join(tmp, "data"));
    // The coordinator (this process) and the workers share this data folder, as on a shared file system.
    process.env.TRACEWRIGHT_DATA_DIR = path.join(tmp, "data");
    redis = await startLocalRedis();
    queue = await openShotQueue({ url: redis.url, attempts: 2, retryDelayMs: 100 });
    pool = createWorkerPool(1);
    local = localShotExecutor(() => pool);
    reference = await local.runShots("shotGradientTask", tasks, { batch: "reference" });
  });

  afterAll(async () => {
    await Promise.all(workers.map((w) => w.stop("SIGKILL")));
    await queue?.close();
    await pool?.close();
    await redis?.stop();
    fs.rmSync(tmp, { recursive: true, force: true });
  });

  it("gives the local pool's per-shot results and summed gradient bit for bit with one worker, then with two", async () => {
    await startWorker();
    const one = await onQueue("one-worker").runShots("shotGradientTask", tasks, { batch: "stage-1/start" });
    expectSameResults(reference, one);

    await startWorker();
    const executor = onQueue("two-workers");
    const two = await executor.runShots("shotGradientTask", tasks, { batch: "stage-1/start" });
    expectSameResults(reference, two);
    const rows = (await listRunShotTasks(queue, 7)).filter((r) => r.step === "two-workers");
    expect(rows.map((r) => r.shotId).sort()).toEqual(tasks.map((t) => t.shotId));
    expect(rows.every((r) => r.state === "completed")).toBe(true);
    // Both workers took tasks (each waits blocked on the queue; the first is busy when the second job comes).
    expect(new Set(rows.map((r) => r.worker)).size).toBe(2);
    // Inputs by hash: the model is written once for the batch, the job data stay small.
    const job = await queue.queue.getJob(rows[0].jobId);
    expect(JSON.stringify(job!.data).length).toBeLessThan(4096);
    expect(Object.keys(job!.data.parts.byHash).sort()).toEqual(["model", "observed"]);
  });

  it("retries the task of a worker killed in the middle of it elsewhere; the result is unchanged and each shot counts once", async () => {
    while (workers.filter((w) => w.alive()).length < 2) await startWorker();
    const [first] = workers.filter((w) => w.alive());
    const long = shotTasks(model, 600);
    const localLong = await local.runShots("shotGradientTask", long, { batch: "reference-long" });
    const running = onQueue("killed-worker").runShots("shotGradientTask", long, { batch: "stage-1/iteration-1/evaluation-1" });
    await until(async () => (await listWorkers(await queue.redis())).some((r) => r.pid === first.pid && r.currentTasks.length > 0), "the first worker to take a task");
    await first.stop("SIGKILL");
    const results = await running;
    expectSameResults(localLong, results);
    const rows = (await listRunShotTasks(queue, 7)).filter((r) => r.step === "killed-worker");
    // One job per shot (the job id makes a retry the same task), every one completed, one of them after a stall.
    expect(rows.map((r) => r.shotId).sort()).toEqual(long.map((t) => t.shotId));
    expect(rows.every((r) => r.state === "completed")).toBe(true);
    expect(rows.filter((r) => r.stalls > 0).length).toBe(1);
  });

  it("fails the batch naming the shot when its task fails on every try", async () => {
    const bad = tasks.map((t, k) => (k === 2 ? { ...t, arg: { ...t.arg, observed: t.arg.observed.subarray(0, 100) } } : t));
    await expect(onQueue("failing").runShots("shotGradientTask", bad, { batch: "stage-1/start" })).rejects.toThrow(/shot shot-3 \(stage-1\/start\) failed on the job queue after 2 tries: .*observed must hold/);
    const row = (await listRunShotTasks(queue, 7)).find((r) => r.step === "failing" && r.shotId === "shot-3");
    expect(row).toMatchObject({ state: "failed", attemptsMade: 2 });
  });

  it("stops a running task on its worker when the step is cancelled", async () => {
    await ensureWorker();
    const live = new Set(workers.filter((w) => w.alive()).map((w) => w.pid));
    const controller = new AbortController();
    // Long enough (20 s of record) that the cancel reaches the worker while the task still runs,
    // also when its inputs are already in the worker's cache from the tests before.
    const slow = shotTasks(model, 40000).slice(0, 1);
    const running = onQueue("cancelled", controller.signal).runShots("shotGradientTask", slow, { batch: "stage-1/start", signal: controller.signal });
    running.catch(() => undefined);
    // Started: the queue holds the job as active (the workers' heartbeat, every 2 s, may miss a short task).
    await until(
      async () =>
        (await listRunShotTasks(queue, 7)).some((r) => r.step === "cancelled" && r.state === "active") ||
        (await listWorkers(await queue.redis())).some((r) => live.has(r.pid) && r.currentTasks.length > 0),
      "a worker to start the slow task",
      30_000,
    );
    controller.abort();
    await expect(running).rejects.toThrow(/cancelled/);
    await until(async () => (await listRunShotTasks(queue, 7)).some((r) => r.step === "cancelled" && r.state === "failed"), "the worker to stop the task", 30_000);
    const row = (await listRunShotTasks(queue, 7)).find((r) => r.step === "cancelled")!;
    expect(row.failedReason).toMatch(/cancelled/);
    // Given up, not retried: a cancel is final.
    expect(row.attemptsMade).toBe(1);
  });

  it("forward-model through the queue writes the same synthetic artifact as with the local pool", async () => {
    const params = forwardModelParams.parse({
      mode: "sh",
      pmlCells: 8,
      rickerPeakHz: 30,
      geometryFrom: "spread",
      spread: { sourceXM: [2, 9, 16], firstReceiverXM: 1, receiverSpacingM: 2, receiverCount: 9, sampleIntervalS: 0.0005, sampleCount: 200 },
    });
    await ensureWorker();
    const here = makeStepContext({ pool });
    const there = makeStepContext({ pool });
    there.shots = onQueue("forward-model");
    const a = await forwardModelStep.run({ model: truth }, params, here);
    const b = await forwardModelStep.run({ model: truth }, params, there);
    const hash = (g: GatherSet | undefined) => sha256Hex(encodeArtifact(g));
    expect((b.outputs.synthetic as GatherSet).gathers.length).toBe(3);
    expect(hash(b.outputs.synthetic as GatherSet)).toBe(hash(a.outputs.synthetic as GatherSet));
  });

  it("waveform-inversion through the queue ends with the local pool's model, bit for bit", { timeout: 180_000 }, async () => {
    // Two iterations of one stage: stage start, line-search evaluations and final synthetics all go
    // through the executor; the model depends on every per-shot misfit and gradient summed in shot order.
    const gathers: GatherSet = {
      kind: "gathers",
      gathers: tasks.map((t, s) => ({
        id: t.shotId,
        sampleIntervalS: t.arg.output.intervalS,
        sampleCount: t.arg.output.count,
        startTimeS: 0,
        traces: receiverX.map((rx, c) => ({
          sourceFile: t.shotId, channel: c + 1, sourcePoint: s + 1, blow: 0, sourceX: sources[s], sourceZ: 0,
          receiverX: rx, receiverZ: 0, offset: rx - sources[s], stackCount: 1, component: "y" as const, dead: false,
        })),
        data: t.arg.observed,
      })),
    };
    const params = waveformInversionParams.parse({
      mode: "sh", pmlCells: 8, waveletFrom: "ricker", rickerPeakHz: 30, fixedOutsideSpread: false, smoothingM: 0.5, sourceTaperM: 1, receiverTaperM: 0,
      stages: [{ lowPassHz: 60, measure: "least-squares", iterations: 2, stopBelowRelativeChange: 0, reestimateWavelet: false }],
    });
    await ensureWorker();
    const here = makeStepContext({ pool });
    const there = makeStepContext({ pool });
    there.shots = onQueue("waveform-inversion");
    const a = await waveformInversionStep.run({ gathers, model }, params, here);
    const b = await waveformInversionStep.run({ gathers, model }, params, there);
    expect(bytes(b.outputs.model!.vs)).toEqual(bytes(a.outputs.model!.vs));
    expect(b.outputs.report!.data).toEqual(a.outputs.report!.data);
    // The model changed (the comparison is not between two copies of the start).
    expect(bytes(a.outputs.model!.vs)).not.toEqual(bytes(model.vs));
    const batches = new Set((await listRunShotTasks(queue, 7)).filter((r) => r.step === "waveform-inversion").map((r) => r.batch));
    expect([...batches]).toEqual(expect.arrayContaining(["stage-1/start", "stage-1/iteration-1/evaluation-1", "stage-1/iteration-2/evaluation-1", "final"]));
  });
});
