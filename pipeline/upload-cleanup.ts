/**
 * Clean-up of transfers that never finish: a file whose resumable transfer received no byte for
 * TRACEWRIGHT_UPLOAD_STALE_HOURS (24 by default) is marked expired (audit event
 * `upload.transfer-expired`) and its partial file removed from <data>/uploads/transfers; files left
 * there by nothing still receiving (a file left out of a completed upload, a transfer whose record
 * is gone) are removed once they are as old. The crew can send an expired file again: its name is
 * free in the upload.
 *
 * Runs at the web server's start and every hour after (instrumentation.ts), and from
 * `tracewright uploads clean`. The clock is an argument, so tests move it.
 */
import fs from "node:fs";
import path from "node:path";
import { z } from "zod";
import type { Db } from "../db/client";
import type { Actor } from "../db/queries/audit";
import { expireTransfer, listIdleTransfers, listReceivingTransferIds } from "../db/queries/uploads";
import { AppError } from "./errors";
import { formatBytes, transfersDir } from "./uploads";

const HOUR_MS = 3_600_000;

const staleSchema = z.coerce
  .number({ message: "TRACEWRIGHT_UPLOAD_STALE_HOURS must be a positive number of hours" })
  .positive("TRACEWRIGHT_UPLOAD_STALE_HOURS must be a positive number of hours")
  .finite("TRACEWRIGHT_UPLOAD_STALE_HOURS must be a positive number of hours");

/**
 * Hours without a byte after which a transfer is abandoned (TRACEWRIGHT_UPLOAD_STALE_HOURS). @default 24
 *
 * @throws AppError "bad-input" naming the setting when it is not a positive number
 */
export function staleTransferHours(env: Record<string, string | undefined> = process.env): number {
  const raw = env.TRACEWRIGHT_UPLOAD_STALE_HOURS;
  if (raw === undefined || raw.trim() === "") return 24;
  const parsed = staleSchema.safeParse(raw);
  if (!parsed.success) throw new AppError("bad-input", `${parsed.error.issues[0].message}, got "${raw}"`, { field: "TRACEWRIGHT_UPLOAD_STALE_HOURS" });
  return parsed.data;
}

/** What a clean-up pass did. */
export interface TransferCleanup {
  /** The moment the pass measured idleness from. */
  at: string;
  staleHours: number;
  /** Transfers marked expired, with the bytes they had received and how long they had been idle. */
  expired: { sessionId: number; transferId: string; name: string; receivedBytes: number; sizeBytes: number; idleHours: number }[];
  /** Files removed from the transfers folder (partial files and their tus descriptions). */
  removedFiles: string[];
  freedBytes: number;
}

/** The actor of passes nobody started by hand. */
export const CLEANUP_ACTOR: Actor = { userId: null, label: "upload clean-up", door: "web" };

function removeFile(file: string, out: TransferCleanup): void {
  let size = 0;
  try {
    size = fs.statSync(file).size;
  } catch {
    return;
  }
  fs.rmSync(file, { force: true });
  out.removedFiles.push(file);
  out.freedBytes += size;
}

/**
 * One clean-up pass: expires transfers idle for longer than `staleHours` (each in its own
 * transaction with its audit event, its partial file removed after) and removes files of the
 * transfers folder that nothing receives into and that were last written before the same limit.
 *
 * @param opts.now the clock. @default new Date()
 * @param opts.staleHours @default staleTransferHours()
 * @param opts.actor who the audit events name. @default CLEANUP_ACTOR
 */
export function cleanAbandonedTransfers(db: Db, opts: { now?: Date; staleHours?: number; actor?: Actor } = {}): TransferCleanup {
  const now = opts.now ?? new Date();
  const staleHours = opts.staleHours ?? staleTransferHours();
  if (!(staleHours > 0)) throw new RangeError(`staleHours must be positive, got ${staleHours}`);
  const cutoff = new Date(now.getTime() - staleHours * HOUR_MS);
  const dir = transfersDir();
  const out: TransferCleanup = { at: now.toISOString(), staleHours, expired: [], removedFiles: [], freedBytes: 0 };

  for (const f of listIdleTransfers(db, cutoff)) {
    const last = f.lastReceivedAt ?? f.createdAt;
    const idleHours = (now.getTime() - last.getTime()) / HOUR_MS;
    const message =
      `${f.name}: expired, no byte arrived for ${Math.floor(idleHours)} h (${formatBytes(f.receivedBytes)} of ${formatBytes(f.sizeBytes)} had arrived; ` +
      `limit TRACEWRIGHT_UPLOAD_STALE_HOURS=${staleHours}); its partial file was removed, send it again`;
    // The record first: a transfer that is no longer receiving keeps its file.
    if (!expireTransfer(db, f.id, { actor: opts.actor ?? CLEANUP_ACTOR, at: now, idleHours, message })) continue;
    out.expired.push({ sessionId: f.sessionId, transferId: f.transferId, name: f.name, receivedBytes: f.receivedBytes, sizeBytes: f.sizeBytes, idleHours: Math.round(idleHours * 10) / 10 });
    removeFile(path.join(dir, f.transferId), out);
    removeFile(path.join(dir, `${f.transferId}.json`), out);
  }

  if (fs.existsSync(dir)) {
    const receiving = listReceivingTransferIds(db);
    for (const name of fs.readdirSync(dir)) {
      const id = name.endsWith(".json") ? name.slice(0, -5) : name;
      if (receiving.has(id)) continue;
      const file = path.join(dir, name);
      let stat: fs.Stats;
      try {
        stat = fs.statSync(file);
      } catch {
        continue;
      }
      if (stat.isFile() && stat.mtimeMs < cutoff.getTime()) removeFile(file, out);
    }
  }
  return out;
}
