/**
 * The resumable transfer of field files (tus protocol 1.0, @tus/server with its file store) behind
 * /api/uploads: a file is announced with its size and its upload session (POST), sent in chunks
 * (PATCH, each at the offset the server holds), and an interrupted transfer asks for that offset
 * (HEAD) and goes on from there. Every request is checked for the role and the origin here; a
 * finished file is handed to the checks on arrival (pipeline/uploads.ts) before the last answer.
 *
 * Chunks: the proxy (proxy.ts) sees every request body and buffers up to 10 MB of it, so the
 * browser sends chunks of at most TRANSFER_CHUNK_BYTES.
 */
import "server-only";
import fs from "node:fs";
import path from "node:path";
import { FileStore } from "@tus/file-store";
import { Server } from "@tus/server";
import { getDb } from "@/db/client";
import { addReceivedBytes } from "@/db/queries/uploads";
import { AppError, toAppError } from "@/pipeline/errors";
import { admitFile, checkArrivedFile, transfersDir, uploadLimits } from "@/pipeline/uploads";
import { assertSameOrigin, errorResponse } from "./api";
import { requirePermission } from "./session";

/** Where the transfer route answers. */
export const TRANSFER_PATH = "/api/uploads";

type TusError = { status_code: number; body: string };

/** An AppError as the transfer server sends it: its status and its message as plain text. */
function asTusError(err: unknown): TusError {
  const e = toAppError(err);
  if (e.code === "internal") console.error("[uploads] internal error:", e.cause ?? e);
  return { status_code: e.httpStatus, body: e.message };
}

let server: { dir: string; tus: Server } | undefined;

/** The transfer server of this process (one per data folder). */
function transferServer(): Server {
  const dir = transfersDir();
  if (server?.dir === dir) return server.tus;
  fs.mkdirSync(dir, { recursive: true });
  const options: ConstructorParameters<typeof Server>[0] = {
    path: TRANSFER_PATH,
    datastore: new FileStore({ directory: dir }),
    relativeLocation: true,
    // Same origin only: no cross-origin answers at all.
    allowedOrigins: () => false,
    async onUploadCreate(_req, upload) {
      try {
        const meta = upload.metadata ?? {};
        const sessionId = Number(meta.sessionId);
        if (!Number.isSafeInteger(sessionId) || sessionId <= 0) {
          throw new AppError("bad-input", "Upload-Metadata: sessionId must name an open upload", { field: "sessionId" });
        }
        if (upload.size === undefined) throw new AppError("bad-input", `${meta.filename ?? "file"}: the file's size must be announced (Upload-Length)`, { field: "size" });
        admitFile(getDb(), { sessionId, transferId: upload.id, name: meta.filename ?? "", sizeBytes: upload.size, limits: uploadLimits() });
        return {};
      } catch (err) {
        throw asTusError(err);
      }
    },
    async onUploadFinish(_req, upload) {
      try {
        const file = await checkArrivedFile(getDb(), upload.id, path.join(dir, upload.id));
        fs.rmSync(path.join(dir, `${upload.id}.json`), { force: true });
        return {
          status_code: 200,
          headers: { "Content-Type": "application/json" },
          body: JSON.stringify({ name: file.name, verdict: file.verdict, message: file.message, byteOffset: file.byteOffset, format: file.format }),
        };
      } catch (err) {
        throw asTusError(err);
      }
    },
    onResponseError(_req, err) {
      if (err instanceof Error && !("status_code" in err)) return asTusError(err);
      return undefined;
    },
  };
  server = { dir, tus: new Server(options) };
  return server.tus;
}

/** The transfer id in a request's address (/api/uploads/<id>), or null. */
function transferIdOf(req: Request): string | null {
  const p = new URL(req.url).pathname;
  const rest = p.startsWith(`${TRANSFER_PATH}/`) ? p.slice(TRANSFER_PATH.length + 1) : "";
  return /^[A-Za-z0-9_-]{1,128}$/.test(rest) ? rest : null;
}

/**
 * A copy of a PATCH request whose body counts the bytes that arrive; `done()` records them on the
 * file (upload_files.received_bytes), whether the body ended or was cut off. A transfer resumed
 * from the server's offset sends no byte twice, which this count shows.
 */
function countingRequest(req: Request, transferId: string): { request: Request; done: () => void } {
  if (!req.body) return { request: req, done: () => undefined };
  let counted = 0;
  const flush = () => {
    if (counted > 0) addReceivedBytes(getDb(), transferId, counted);
    counted = 0;
  };
  const counter = new TransformStream<Uint8Array, Uint8Array>({
    transform(chunk, controller) {
      counted += chunk.byteLength;
      controller.enqueue(chunk);
    },
  });
  const init = { method: req.method, headers: req.headers, body: req.body.pipeThrough(counter), duplex: "half" };
  return { request: new Request(req.url, init as RequestInit), done: flush };
}

/**
 * Answers a transfer request: signed in with permission to upload, from our own origin for
 * requests that change something, then the tus server.
 */
export async function handleTransfer(req: Request): Promise<Response> {
  try {
    await requirePermission("uploads.send");
    if (req.method !== "HEAD") assertSameOrigin(req);
    const id = transferIdOf(req);
    if (req.method !== "PATCH" || !id) return await transferServer().handleWeb(req);
    const counting = countingRequest(req, id);
    try {
      return await transferServer().handleWeb(counting.request);
    } finally {
      counting.done();
    }
  } catch (err) {
    return errorResponse(err);
  }
}
