import { handleTransfer } from "@/app/lib/upload-transfers";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

/** POST /api/uploads: announce a file of an upload session (tus creation; Upload-Length, Upload-Metadata sessionId and filename). */
export async function POST(req: Request) {
  return handleTransfer(req);
}

/** PATCH /api/uploads/:transferId: a chunk at the offset the server holds (tus); the last one answers the file's verdict. */
export async function PATCH(req: Request) {
  return handleTransfer(req);
}

/** HEAD /api/uploads/:transferId: the offset the server holds, so an interrupted transfer goes on from there (tus). */
export async function HEAD(req: Request) {
  return handleTransfer(req);
}
