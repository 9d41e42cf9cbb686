/**
 * The C yardstick of the solver bench: a plain, single-threaded C build of the interior update of
 * the same P-SV scheme (../shared/perf-ref, built with gcc -O3 -march=native on the machine that
 * measures). Finds or builds the binary and runs it; prints nothing.
 */
import { execFile, execFileSync } from "node:child_process";
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { fileURLToPath } from "node:url";

/** Environment variable naming the yardstick binary. */
export const YARDSTICK_ENV = "TRACEWRIGHT_YARDSTICK";

/** Where the yardstick binary came from, or why there is none. */
export type YardstickLocation =
  | { found: true; binary: string; origin: "option" | "environment" | "built" }
  | { found: false; reason: string };

const repoRoot = path.resolve(path.dirname(fileURLToPath(import.meta.url)), "..", "..");

/** The perf-ref source folder: ../shared/perf-ref beside the checkout (or beside its parent, for worktrees). */
export function yardstickSourceDir(root = repoRoot): string | undefined {
  for (const up of ["..", path.join("..", "..")]) {
    const dir = path.resolve(root, up, "shared", "perf-ref");
    if (fs.existsSync(path.join(dir, "ref.c")) && fs.existsSync(path.join(dir, "build.sh"))) return dir;
  }
  return undefined;
}

function hasGcc(): boolean {
  try {
    execFileSync("gcc", ["--version"], { stdio: "ignore" });
    return true;
  } catch {
    return false;
  }
}

/**
 * The yardstick binary: `explicitPath` (the --yardstick option), else TRACEWRIGHT_YARDSTICK, else
 * built from ../shared/perf-ref into the temporary folder when gcc and the folder are present
 * (rebuilt only when the source is newer than the binary).
 */
export function locateYardstick(explicitPath?: string, env: Record<string, string | undefined> = process.env): YardstickLocation {
  const given = explicitPath ?? env[YARDSTICK_ENV];
  if (given) {
    const origin = explicitPath ? "option" : "environment";
    const label = explicitPath ? "--yardstick" : YARDSTICK_ENV;
    try {
      fs.accessSync(given, fs.constants.X_OK);
    } catch {
      return { found: false, reason: `${label} ${given}: no executable file there` };
    }
    return { found: true, binary: path.resolve(given), origin };
  }
  const src = yardstickSourceDir();
  if (!src) return { found: false, reason: `no --yardstick path, no ${YARDSTICK_ENV}, and no ../shared/perf-ref folder beside the checkout` };
  if (!hasGcc()) return { found: false, reason: `no --yardstick path, no ${YARDSTICK_ENV}, and no gcc to build ../shared/perf-ref` };
  const out = path.join(os.tmpdir(), "tracewright-yardstick");
  const binary = path.join(out, "ref_fast");
  const newest = Math.max(...["ref.c", "build.sh"].map((f) => fs.statSync(path.join(src, f)).mtimeMs));
  if (!fs.existsSync(binary) || fs.statSync(binary).mtimeMs < newest) {
    try {
      execFileSync("sh", [path.join(src, "build.sh"), out], { stdio: ["ignore", "ignore", "pipe"] });
    } catch (e) {
      const msg = (e as { stderr?: Buffer }).stderr?.toString().trim() || String(e);
      return { found: false, reason: `building ../shared/perf-ref failed: ${msg.split("\n")[0]}` };
    }
  }
  return { found: true, binary, origin: "built" };
}

/** One run of the yardstick: its printed rate and the seconds that implies. */
export interface YardstickRun {
  /** Million cell updates per second (the whole nx × nz grid, as the yardstick counts). */
  mcells: number;
  seconds: number;
}

/** Runs the yardstick once on an nx × nz grid for `steps` timed steps after `warmupSteps`. */
export function runYardstick(binary: string, nx: number, nz: number, steps: number, warmupSteps = 20): Promise<YardstickRun> {
  return new Promise((resolve, reject) => {
    execFile(binary, [String(nx), String(nz), String(steps), String(warmupSteps)], { timeout: 600_000 }, (err, stdout) => {
      if (err) return reject(new Error(`the yardstick ${binary} failed: ${err.message}`));
      const m = /mcells=([0-9.eE+-]+)/.exec(stdout);
      const mcells = Number(m?.[1]);
      if (!m || !(mcells > 0)) return reject(new Error(`the yardstick ${binary} printed no mcells=<rate>: ${stdout.trim().slice(0, 200)}`));
      resolve({ mcells, seconds: (nx * nz * steps) / (mcells * 1e6) });
    });
  });
}
