/**
 * Reading a folder of field files: list, hash, and the folder's content hash
 * (SHA-256 over the sorted "name<TAB>sha256" lines), which identifies a dataset.
 */
import fs from "node:fs";
import path from "node:path";
import { createHash } from "node:crypto";
import { AppError } from "./errors";

export interface ScannedFile {
  name: string;
  sizeBytes: number;
  sha256: string;
}

/** Files that are never field data: hidden files and partial copies. */
export function isIgnoredName(name: string): boolean {
  return name.startsWith(".") || name.endsWith("~") || /\.(part|partial|tmp|crdownload)$/i.test(name);
}

/** SHA-256 of a file, hex. */
export function hashFile(file: string): string {
  const h = createHash("sha256");
  const fd = fs.openSync(file, "r");
  try {
    const buf = Buffer.allocUnsafe(1 << 20);
    let n: number;
    while ((n = fs.readSync(fd, buf, 0, buf.length, null)) > 0) h.update(buf.subarray(0, n));
  } finally {
    fs.closeSync(fd);
  }
  return h.digest("hex");
}

/** Combines file hashes into a folder content hash. */
export function folderContentHash(files: ScannedFile[]): string {
  const h = createHash("sha256");
  for (const f of [...files].sort((a, b) => (a.name < b.name ? -1 : a.name > b.name ? 1 : 0))) h.update(`${f.name}\t${f.sha256}\n`);
  return h.digest("hex");
}

/** Lists and hashes the regular files directly in `folder` (sorted by name). */
export function scanFolder(folder: string): { files: ScannedFile[]; contentHash: string } {
  let entries: fs.Dirent[];
  try {
    entries = fs.readdirSync(folder, { withFileTypes: true });
  } catch {
    throw new AppError("not-found", `Field-data folder ${folder} cannot be read (does it exist?)`, { file: folder });
  }
  const files = entries
    .filter((e) => e.isFile() && !isIgnoredName(e.name))
    .map((e) => e.name)
    .sort()
    .map((name) => {
      const full = path.join(folder, name);
      return { name, sizeBytes: fs.statSync(full).size, sha256: hashFile(full) };
    });
  return { files, contentHash: folderContentHash(files) };
}
