/**
 * A job queue on this machine, for the bench, the demo and the tests: a throw-away redis-server
 * (Debian's package) on a free port with no persistence, and `tracewright worker` processes started
 * as children. Production runs Redis and the workers as services; nothing here is needed there.
 */
import { spawn, spawnSync, type ChildProcess } from "node:child_process";
import net from "node:net";
import path from "node:path";
import { projectRoot } from "../../db/paths";

/** A redis-server this process started. */
export interface LocalRedis {
  url: string;
  port: number;
  /** Stops it (by its pid). */
  stop(): Promise<void>;
}

/** Whether the redis-server binary is on the PATH. */
export function redisServerAvailable(): boolean {
  const r = spawnSync("redis-server", ["--version"], { stdio: "ignore" });
  return !r.error && r.status === 0;
}

/** A free TCP port on 127.0.0.1. */
export function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const srv = net.createServer();
    srv.once("error", reject);
    srv.listen(0, "127.0.0.1", () => {
      const port = (srv.address() as net.AddressInfo).port;
      srv.close(() => resolve(port));
    });
  });
}

function stopChild(child: ChildProcess, signal: NodeJS.Signals = "SIGTERM"): Promise<void> {
  if (child.exitCode !== null || child.signalCode !== null) return Promise.resolve();
  return new Promise((resolve) => {
    child.once("exit", () => resolve());
    child.kill(signal);
  });
}

/** Starts redis-server on a free port (no snapshots, no append-only file); resolves when it accepts connections. */
export async function startLocalRedis(): Promise<LocalRedis> {
  const port = await freePort();
  const child = spawn("redis-server", ["--port", String(port), "--bind", "127.0.0.1", "--save", "", "--appendonly", "no"], { stdio: ["ignore", "pipe", "pipe"] });
  await new Promise<void>((resolve, reject) => {
    let out = "";
    const timer = setTimeout(() => reject(new Error(`redis-server on port ${port} did not start within 10 s: ${out.slice(-300)}`)), 10_000);
    child.once("error", (e) => {
      clearTimeout(timer);
      reject(e);
    });
    child.stdout!.on("data", (b: Buffer) => {
      out += b.toString();
      if (out.includes("Ready to accept connections")) {
        clearTimeout(timer);
        resolve();
      }
    });
    child.once("exit", (code) => {
      clearTimeout(timer);
      reject(new Error(`redis-server exited with ${code}: ${out.slice(-300)}`));
    });
  });
  child.stdout!.resume();
  child.stderr!.resume();
  return { url: `redis://127.0.0.1:${port}`, port, stop: () => stopChild(child) };
}

/** A `tracewright worker` child process. */
export interface WorkerProcess {
  pid: number;
  /** What it printed, for diagnostics. */
  output(): string;
  /** Ends it: SIGTERM lets it finish its tasks, SIGKILL kills it on the spot (as a crash would). */
  stop(signal?: NodeJS.Signals): Promise<void>;
  /** Resolves when it has exited. */
  exited: Promise<number | null>;
  /** False once it has exited. */
  alive(): boolean;
}

/** Starts `tracewright worker` with the queue URL and data folder given. */
export function spawnWorkerProcess(options: { url: string; dataDir: string; concurrency?: number; lockMs?: number; env?: Record<string, string> }): WorkerProcess {
  const args = ["--import", "tsx", path.join(projectRoot, "cli", "index.ts"), "worker", "--concurrency", String(options.concurrency ?? 1)];
  if (options.lockMs) args.push("--lock-ms", String(options.lockMs));
  const child = spawn(process.execPath, args, {
    cwd: projectRoot,
    env: { ...process.env, ...options.env, TRACEWRIGHT_REDIS_URL: options.url, TRACEWRIGHT_DATA_DIR: options.dataDir },
    stdio: ["ignore", "pipe", "pipe"],
  });
  let out = "";
  child.stdout!.on("data", (b: Buffer) => (out += b.toString()));
  child.stderr!.on("data", (b: Buffer) => (out += b.toString()));
  const exited = new Promise<number | null>((resolve) => child.once("exit", (code) => resolve(code)));
  return { pid: child.pid!, output: () => out, stop: (signal) => stopChild(child, signal), exited, alive: () => child.exitCode === null && child.signalCode === null };
}
