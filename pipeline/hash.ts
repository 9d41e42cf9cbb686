/** SHA-256 helpers. */
import { createHash } from "node:crypto";

/** SHA-256 of bytes or text, hex. */
export function sha256Hex(data: Uint8Array | string): string {
  return createHash("sha256").update(data).digest("hex");
}
