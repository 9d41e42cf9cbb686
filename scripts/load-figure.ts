/**
 * The load figure: signed-in users at once on the runs list, a run page and the trace endpoint
 * of the control room, served by `next start` on loopback, measured with autocannon.
 *
 *   npm run bench:load -- --data <data folder> [--seconds 30] [--users 50] [--timeout 10] [--warmup 5] [--targets runs-list,run-page,trace-endpoint] [--out <file.json>]
 *
 * Use a copy of a prepared data folder (`cp -a /work/final-data /tmp/my-data`): the figure adds
 * its users to it (load-user-NN@corvell.example, processor role, through db/queries/users.ts with
 * an audit event each; kept for the next time). It builds the control room when the build is
 * missing or older than the sources, starts it, signs every user in over HTTP (each has its own
 * session cookie) and then, one target after the other, keeps one connection per user busy for
 * the stated time (autocannon, keep-alive, one request at a time per connection), after a
 * warm-up of --warmup seconds (default 5; the first answers of a route after `next start` load
 * its modules; reported on its own line, not in the figures):
 *   - the runs list (/runs),
 *   - the page of the latest succeeded run with gathers (/runs/<id>),
 *   - the trace endpoint of that run's last gathers (/api/artifacts/<hash>/traces?gather=<id>), a
 *     different gather for each user.
 * Each target is checked once first (200 and the expected content for a signed-in user). Errors
 * are non-2xx answers (a lost session shows as a redirect), socket errors and timeouts
 * (--timeout seconds). Latency percentiles are nearest-rank over every response
 * (pipeline/bench/latency.ts). Prints a table with the machine and load average, writes JSON
 * (--out, default <os tmp>/load-figure.json) and exits 1 when there was any error.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import autocannon, { type Result } from "autocannon";
import { openDatabase, writeTransaction } from "../db/client";
import { recordAudit } from "../db/queries/audit";
import { getRun, listRuns } from "../db/queries/runs";
import { createUser, getUserByEmail } from "../db/queries/users";
import { DEMO_ACCOUNTS } from "../db/seed";
import { summariseLatency, type LatencySummary } from "../pipeline/bench/latency";
import { describeMachine, formatMachine, type MachineDescription } from "../pipeline/bench/machine";
import { ensureBuild, startServer } from "../tests/e2e/harness";
import { signInOverHttp } from "./http-session";

function argValue(args: string[], name: string, fallback?: string): string | undefined {
  const i = args.indexOf(name);
  return i >= 0 && i + 1 < args.length ? args[i + 1] : fallback;
}

export interface TargetFigure extends LatencySummary {
  name: string;
  path: string;
  non2xx: number;
  /** Status code → count, every answer. */
  statuses: Record<string, number>;
  socketErrors: number;
  /** Seconds from the start of the target at which each socket error or timeout was reported. */
  errorAtS: number[];
  timeouts: number;
  errors: number;
  requestsPerSecond: number;
  megabytesPerSecond: number;
  seconds: number;
  /** The warm-up before the measurement (not in the figures above), or null without one. */
  warmUp: { seconds: number; requests: number; errors: number; p95Ms: number; maxMs: number } | null;
}

export interface LoadFigure {
  machine: MachineDescription;
  loadAverageAfter: [number, number, number];
  users: number;
  secondsPerTarget: number;
  timeoutS: number;
  warmupS: number;
  runId: number;
  targets: TargetFigure[];
  errors: number;
}

const PASSWORD = (i: number) => `load-figure-password-${String(i).padStart(2, "0")}`;
const EMAIL = (i: number) => `load-user-${String(i).padStart(2, "0")}@corvell.example`;

/** Adds the load users that are missing (processor role), each with its audit event. */
function ensureUsers(dbFile: string, count: number): void {
  const db = openDatabase(dbFile);
  try {
    const admin = getUserByEmail(db, DEMO_ACCOUNTS.find((a) => a.role === "admin")!.email);
    for (let i = 1; i <= count; i++) {
      if (getUserByEmail(db, EMAIL(i))) continue;
      writeTransaction(db, (tx) => {
        const u = createUser(tx, { email: EMAIL(i), name: `Load User ${i}`, role: "processor", password: PASSWORD(i) });
        recordAudit(tx, {
          actor: { userId: admin?.id ?? null, label: admin?.email ?? "load figure", door: "cli" },
          action: "user.add",
          entityType: "user",
          entityId: u.id,
          after: { email: u.email, name: u.name, role: u.role },
        });
      });
    }
  } finally {
    db.$client.close();
  }
}

/** The latest succeeded run with a gathers output, its last gathers artifact and the ids of its gathers. */
function pickRun(dbFile: string): { runId: number; hash: string } {
  const db = openDatabase(dbFile);
  try {
    for (const r of listRuns(db, { status: "succeeded", pageSize: 200 }).rows) {
      const run = getRun(db, r.id);
      const withGathers = run?.steps.filter((s) => s.outputs.gathers) ?? [];
      if (withGathers.length) return { runId: r.id, hash: withGathers[withGathers.length - 1].outputs.gathers };
    }
  } finally {
    db.$client.close();
  }
  throw new Error("no succeeded run with gathers in this data folder (prepare it with the demo first)");
}

async function measure(name: string, origin: string, urlPaths: string[], cookies: string[], seconds: number, timeoutS: number): Promise<Omit<TargetFigure, "warmUp">> {
  const times: number[] = [];
  const statuses: Record<string, number> = {};
  let socketErrors = 0;
  let next = 0;
  const began = Date.now();
  /** Seconds from the start at which each socket error or timeout was reported. */
  const errorAtS: number[] = [];
  const result = await new Promise<Result>((resolve, reject) => {
    const instance = autocannon(
      {
        url: `${origin}${urlPaths[0]}`,
        connections: cookies.length,
        duration: seconds,
        timeout: timeoutS,
        // One connection per user: its own session cookie (and, for the traces, its own gather).
        setupClient: (client) => {
          const i = next++ % cookies.length;
          client.setRequests([{ method: "GET", path: urlPaths[i % urlPaths.length], headers: { cookie: cookies[i] } }]);
        },
      },
      (err, res) => (err ? reject(err) : resolve(res)),
    );
    instance.on("response", (_client, statusCode, _bytes, responseTime) => {
      times.push(responseTime);
      statuses[statusCode] = (statuses[statusCode] ?? 0) + 1;
    });
    instance.on("reqError", () => {
      socketErrors++;
      errorAtS.push((Date.now() - began) / 1000);
    });
  });
  // autocannon closes its connections when the time is up, but the server still finishes the
  // requests they had sent: one more request waits behind them, so the next phase starts on a
  // server with nothing left over (else its first answers queue behind a whole wave of this one's).
  await fetch(`${origin}${urlPaths[0]}`, { headers: { cookie: cookies[0] } }).then((r) => r.arrayBuffer());
  const non2xx = Object.entries(statuses)
    .filter(([s]) => !s.startsWith("2"))
    .reduce((n, [, c]) => n + c, 0);
  const lat = summariseLatency(times);
  return {
    name,
    path: urlPaths.length > 1 ? `${urlPaths[0]} (+${urlPaths.length - 1} more)` : urlPaths[0],
    ...lat,
    non2xx,
    statuses,
    socketErrors,
    errorAtS,
    timeouts: result.timeouts,
    errors: non2xx + socketErrors,
    requestsPerSecond: lat.requests / result.duration,
    megabytesPerSecond: result.throughput.average / 1e6,
    seconds: result.duration,
  };
}

async function main(): Promise<number> {
  const args = process.argv.slice(2);
  const dataArg = argValue(args, "--data");
  if (!dataArg) {
    process.stderr.write("usage: npm run bench:load -- --data <copy of a prepared data folder> [--seconds 30] [--users 50] [--timeout 10] [--out file.json]\n");
    return 2;
  }
  const dataDir = path.resolve(dataArg);
  const dbFile = path.join(dataDir, "tracewright.db");
  if (!fs.existsSync(dbFile)) throw new Error(`${dbFile}: no database there (copy a prepared data folder first)`);
  const seconds = Number(argValue(args, "--seconds", "30"));
  const users = Number(argValue(args, "--users", "50"));
  const timeoutS = Number(argValue(args, "--timeout", "10"));
  const warmupS = Number(argValue(args, "--warmup", "5"));
  if (!(warmupS >= 0)) throw new Error("--warmup: expected a number of seconds >= 0");
  if (!(seconds > 0) || !(Number.isInteger(users) && users >= 1 && users <= 99) || !(timeoutS > 0)) {
    throw new Error("--seconds and --timeout: positive numbers; --users: a whole number from 1 to 99");
  }
  const out = path.resolve(argValue(args, "--out") ?? path.join(os.tmpdir(), "load-figure.json"));

  const machine = describeMachine();
  process.stderr.write(`machine: ${formatMachine(machine)}\n`);
  ensureUsers(dbFile, users);
  const { runId, hash } = pickRun(dbFile);
  process.stderr.write("building the control room when needed...\n");
  await ensureBuild();
  const server = await startServer(dataDir, {});
  let figure: LoadFigure;
  try {
    process.stderr.write(`control room on ${server.origin}; signing in ${users} users...\n`);
    const cookies: string[] = [];
    for (let i = 1; i <= users; i += 10) {
      const batch = Array.from({ length: Math.min(10, users - i + 1) }, (_, j) => signInOverHttp(server.origin, EMAIL(i + j), PASSWORD(i + j)));
      cookies.push(...(await Promise.all(batch)));
    }

    // The gathers of the run: each user asks for its own.
    const outline = await fetch(`${server.origin}/api/artifacts/${hash}`, { headers: { cookie: cookies[0] } });
    if (!outline.ok) throw new Error(`GET /api/artifacts/${hash.slice(0, 12)}… answered ${outline.status}`);
    const gathers = ((await outline.json()) as { gathers?: Array<{ id: string }> }).gathers ?? [];
    const tracePaths = gathers.length ? gathers.map((g) => `/api/artifacts/${hash}/traces?gather=${encodeURIComponent(g.id)}`) : [`/api/artifacts/${hash}/traces`];

    const targets: Array<{ name: string; paths: string[]; expect: (res: Response, body: Buffer) => boolean }> = [
      { name: "runs list", paths: ["/runs"], expect: (res, body) => res.status === 200 && body.includes('data-testid="runs-table"') },
      { name: "run page", paths: [`/runs/${runId}`], expect: (res, body) => res.status === 200 && body.includes(`Run ${runId}`) },
      { name: "trace endpoint", paths: tracePaths, expect: (res, body) => res.status === 200 && body.length > 1000 },
    ];
    const wanted = argValue(args, "--targets")?.split(",").map((x) => x.trim());
    const chosen = wanted ? targets.filter((t) => wanted.includes(t.name.replaceAll(" ", "-"))) : targets;
    if (chosen.length === 0) throw new Error(`--targets ${wanted?.join(",")}: expected some of ${targets.map((t) => t.name.replaceAll(" ", "-")).join(", ")}`);
    const figures: TargetFigure[] = [];
    for (const t of chosen) {
      const check = await fetch(`${server.origin}${t.paths[0]}`, { headers: { cookie: cookies[cookies.length - 1] }, redirect: "manual" });
      const body = Buffer.from(await check.arrayBuffer());
      if (!t.expect(check, body)) throw new Error(`${t.name}: ${t.paths[0]} answered ${check.status} without the expected content for a signed-in user`);
      // The first answers of a route after `next start` load its modules and warm the JIT: a
      // warm-up with the same users comes first, reported but not in the figure.
      let warmUp: TargetFigure["warmUp"] = null;
      if (warmupS > 0) {
        process.stderr.write(`${t.name}: warming up for ${warmupS} s...\n`);
        const w = await measure(t.name, server.origin, t.paths, cookies, warmupS, timeoutS);
        warmUp = { seconds: warmupS, requests: w.requests, errors: w.errors, p95Ms: w.p95Ms, maxMs: w.maxMs };
      }
      process.stderr.write(`${t.name}: ${users} users for ${seconds} s...\n`);
      figures.push({ ...(await measure(t.name, server.origin, t.paths, cookies, seconds, timeoutS)), warmUp });
    }
    figure = {
      machine,
      loadAverageAfter: os.loadavg() as [number, number, number],
      users,
      secondsPerTarget: seconds,
      timeoutS,
      warmupS,
      runId,
      targets: figures,
      errors: figures.reduce((n, f) => n + f.errors, 0),
    };
  } finally {
    await server.stop();
  }
  fs.mkdirSync(path.dirname(out), { recursive: true });
  fs.writeFileSync(out, `${JSON.stringify(figure, null, 2)}\n`);

  const ms = (x: number) => (Number.isFinite(x) ? x.toFixed(0) : "-").padStart(7);
  const lines = [
    `load (${users} signed-in users, one connection each, ${seconds} s per target after ${warmupS} s of warm-up, timeout ${timeoutS} s; next start on loopback; ${formatMachine(machine)}; load average after ${figure.loadAverageAfter.map((x) => x.toFixed(2)).join(" ")}):`,
    `  ${"target".padEnd(16)} ${"requests".padStart(8)} ${"errors".padStart(7)} ${"p50 ms".padStart(7)} ${"p95 ms".padStart(7)} ${"p99 ms".padStart(7)} ${"max ms".padStart(7)} ${"req/s".padStart(7)} ${"MB/s".padStart(6)}`,
    ...figure.targets.map(
      (f) =>
        `  ${f.name.padEnd(16)} ${String(f.requests).padStart(8)} ${String(f.errors).padStart(7)} ${ms(f.p50Ms)} ${ms(f.p95Ms)} ${ms(f.p99Ms)} ${ms(f.maxMs)} ${f.requestsPerSecond.toFixed(1).padStart(7)} ${f.megabytesPerSecond.toFixed(1).padStart(6)}`,
    ),
    ...figure.targets.flatMap((f) =>
      f.warmUp ? [`  (warm-up before ${f.name}: ${f.warmUp.seconds} s, ${f.warmUp.requests} requests, ${f.warmUp.errors} errors, p95 ${f.warmUp.p95Ms.toFixed(0)} ms, max ${f.warmUp.maxMs.toFixed(0)} ms; not in the figures)`] : [],
    ),
    `  run page: /runs/${figure.runId}; errors are non-2xx answers, socket errors and timeouts (${figure.targets.map((f) => `${f.name}: ${f.non2xx} non-2xx, ${f.socketErrors} socket, ${f.timeouts} timeouts`).join("; ")})`,
    `  figures: ${out}`,
  ];
  process.stdout.write(`${lines.join("\n")}\n`);
  return figure.errors === 0 ? 0 : 1;
}

main().then(
  (code) => process.exit(code),
  (err) => {
    process.stderr.write(`load figure: ${(err as Error).stack ?? err}\n`);
    process.exit(1);
  },
);
