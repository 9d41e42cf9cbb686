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

/** Encodes and stores a value; returns its hash, size and relative path. Idempotent. */
export function writeArtifact(value: unknown): { hash: string; sizeBytes: number; relativePath: string } {
  const bytes = encodeArtifact(value);
  const hash = sha256Hex(bytes);
  const relativePath = artifactRelativePath(hash);
  const file = path.join(dataDir(), relativePath);
  if (!fs.existsSync(file)) {
    fs.mkdirSync(path.dirname(file), { recursive: true });
    const tmp = `${file}.${process.pid}.${Date.now()}.tmp`;
    fs.writeFileSync(tmp, bytes);
    try {
      fs.renameSync(tmp, file);
    } catch (err) {
      fs.rmSync(tmp, { force: true });
      if (!fs.existsSync(file)) throw err;
    }
  }
  return { hash, sizeBytes: bytes.length, relativePath };
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
