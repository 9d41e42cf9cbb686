/**
 * Content-addressed artifact files under <data>/artifacts/<first two hex>/<hash>.twa.
 * Writes go to a temporary file first and are renamed into place, so a reader never sees a
 * half-written artifact, and an existing artifact is never overwritten.
 */
import fs from "node:fs";
import path from "node:path";
import { dataDir } from "../db/paths";
import { decodeArtifact, encodeArtifact } from "./artifact-codec";
import { sha256Hex } from "./hash";
import { AppError } from "./errors";

/** Folder holding artifacts. */
export function artifactsDir(): string {
  return path.join(dataDir(), "artifacts");
}

/** Path of the file for `hash` relative to the data folder. */
export function artifactRelativePath(hash: string): string {
  if (!/^[0-9a-f]{64}$/.test(hash)) throw new AppError("bad-input", `"${hash}" is not an artifact hash (64 hex digits expected)`);
  return path.join("artifacts", hash.slice(0, 2), `${hash}.twa`);
}

/** Absolute path of the file for `hash`. */
export function artifactFilePath(hash: string): string {
  return path.join(dataDir(), artifactRelativePath(hash));
}

/** True when the artifact file exists. */
export function hasArtifact(hash: string): boolean {
  return fs.existsSync(artifactFilePath(hash));
}

/**
 * The file operations the store writes through. Tests replace `writeFile` to inject faults (a
 * full disk); nothing else should.
 */
export const artifactFiles = {
  writeFile: (file: string, bytes: Uint8Array): void => fs.writeFileSync(file, bytes),
};

/** A write the disk had no room for: says how much and where. The runner records it as the run's failure. */
export class DiskFullError extends AppError {
  constructor(folder: string, bytes: number, cause: unknown) {
    super("step-failed", `disk full: writing a ${bytes}-byte artifact to ${folder} failed; free space there and resume the run`, { file: folder }, { cause });
    this.name = "DiskFullError";
  }
}

const NO_SPACE = new Set(["ENOSPC", "EDQUOT"]);

/** Encodes and stores a value; returns its hash, size and relative path. Idempotent. */
export function writeArtifact(value: unknown): { hash: string; sizeBytes: number; relativePath: string } {
  const bytes = encodeArtifact(value);
  const hash = sha256Hex(bytes);
  const relativePath = artifactRelativePath(hash);
  const file = path.join(dataDir(), relativePath);
  if (!fs.existsSync(file)) {
    const tmp = `${file}.${process.pid}.${Date.now()}.tmp`;
    try {
      fs.mkdirSync(path.dirname(file), { recursive: true });
      artifactFiles.writeFile(tmp, bytes);
      fs.renameSync(tmp, file);
    } catch (err) {
      // Never leave a partial temporary file behind, whatever went wrong.
      fs.rmSync(tmp, { force: true });
      if (NO_SPACE.has((err as NodeJS.ErrnoException).code ?? "")) {
        releaseDiskReserve();
        throw new DiskFullError(artifactsDir(), bytes.length, err);
      }
      if (!fs.existsSync(file)) throw err;
    }
  }
  return { hash, sizeBytes: bytes.length, relativePath };
}

/** Size of the file kept free on the data disk so a failure can still be recorded when it fills up, bytes. */
export const DISK_RESERVE_BYTES = 4 * 1024 * 1024;

function reservePath(): string {
  return path.join(dataDir(), "disk-reserve");
}

/**
 * Makes sure the reserve file exists (the runner calls this when a run starts). When a write
 * finds the disk full, the reserve is deleted so the database has room to record the failure.
 * Best effort: a disk too full to hold the reserve just has none.
 */
export function ensureDiskReserve(): void {
  const file = reservePath();
  try {
    if (fs.existsSync(file) && fs.statSync(file).size === DISK_RESERVE_BYTES) return;
    fs.mkdirSync(path.dirname(file), { recursive: true });
    fs.writeFileSync(file, new Uint8Array(DISK_RESERVE_BYTES));
  } catch {
    fs.rmSync(file, { force: true });
  }
}

/** Deletes the reserve file, freeing its space. */
export function releaseDiskReserve(): void {
  fs.rmSync(reservePath(), { force: true });
}

function pidAlive(pid: number): boolean {
  if (pid === process.pid) return true;
  try {
    process.kill(pid, 0);
    return true;
  } catch (err) {
    return (err as NodeJS.ErrnoException).code === "EPERM";
  }
}

/**
 * Deletes temporary artifact files (`<hash>.twa.<pid>.<time>.tmp`) left by processes that no
 * longer run (a crash or a full disk mid-write). Every door calls it at start-up. Returns the files deleted.
 */
export function cleanTemporaryArtifacts(): string[] {
  const root = artifactsDir();
  if (!fs.existsSync(root)) return [];
  const removed: string[] = [];
  for (const sub of fs.readdirSync(root)) {
    const dir = path.join(root, sub);
    if (!fs.statSync(dir).isDirectory()) continue;
    for (const name of fs.readdirSync(dir)) {
      const m = /\.twa\.(\d+)\.\d+\.tmp$/.exec(name);
      if (!m || pidAlive(Number(m[1]))) continue;
      fs.rmSync(path.join(dir, name), { force: true });
      removed.push(path.join(dir, name));
    }
  }
  return removed;
}

/** Reads the raw bytes of an artifact. */
export function readArtifactBytes(hash: string): Uint8Array {
  const file = artifactFilePath(hash);
  if (!fs.existsSync(file)) throw new AppError("not-found", `Artifact ${hash.slice(0, 12)} is not in ${artifactsDir()}`);
  return new Uint8Array(fs.readFileSync(file));
}

/** Reads and decodes an artifact. */
export async function readArtifact(hash: string): Promise<unknown> {
  const bytes = readArtifactBytes(hash);
  return decodeArtifact(bytes, `artifact ${hash.slice(0, 12)}`);
}

/** Synchronous form of {@link readArtifact}. */
export function readArtifactSync(hash: string): unknown {
  return decodeArtifact(readArtifactBytes(hash), `artifact ${hash.slice(0, 12)}`);
}
