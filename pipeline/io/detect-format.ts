/**
 * Tells a field file's format from its content, with the file extension as a hint.
 */
import { FileFormatError } from "../errors";
import { isSeg2 } from "./seg2";
import { looksLikeSegy } from "./segy";

export type FieldFileFormat = "seg2" | "segy";

/** Extension (lower case, with the dot) of a file name; "" when there is none. */
export function fileExtension(name: string): string {
  const base = name.slice(name.lastIndexOf("/") + 1);
  const dot = base.lastIndexOf(".");
  return dot > 0 ? base.slice(dot).toLowerCase() : "";
}

/** File name without folder and extension (the gather id of a field file). */
export function fileStem(name: string): string {
  const base = name.slice(name.lastIndexOf("/") + 1);
  const dot = base.lastIndexOf(".");
  return dot > 0 ? base.slice(0, dot) : base;
}

/**
 * Detects the format: the SEG-2 file descriptor ID (0x3a55 in either byte order) at byte 0, else a
 * plausible SEG-Y binary header (known sample format code, non-zero sample interval and count).
 * When neither matches, the extension decides which reader reports the error (.sgy/.segy → SEG-Y,
 * otherwise SEG-2), so the message names what that format expected at which byte.
 */
export function detectFieldFileFormat(name: string, bytes: Uint8Array): FieldFileFormat {
  if (isSeg2(bytes)) return "seg2";
  if (looksLikeSegy(bytes)) return "segy";
  const ext = fileExtension(name);
  if (ext === ".sgy" || ext === ".segy") return "segy";
  if (ext === ".sg2" || ext === ".seg2") return "seg2";
  throw new FileFormatError(
    name,
    0,
    "neither a SEG-2 file nor a SEG-Y file",
    "the SEG-2 ID 0x3a55 at byte 0, or a SEG-Y binary header with a known sample format code at bytes 3225-3226",
  );
}
