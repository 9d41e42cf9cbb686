/**
 * Bounds-checked reads from a field file's bytes. Every read names the file and the byte
 * offset when it would run past the end, so readers throw {@link FileFormatError} instead of
 * the RangeError a bare DataView gives.
 */
import { FileFormatError } from "../errors";

/** Reads numbers at absolute byte offsets of one file, in one byte order. */
export class ByteCursor {
  readonly view: DataView;
  readonly length: number;

  constructor(
    /** File name used in error messages. */
    readonly fileName: string,
    readonly bytes: Uint8Array,
    /** True when multi-byte numbers are little-endian. */
    public littleEndian: boolean,
  ) {
    this.view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
    this.length = bytes.byteLength;
  }

  /**
   * Throws a FileFormatError unless `size` bytes from `offset` lie inside the file. The error is
   * reported at the start of the missing structure, or at the end of the file when the structure
   * would start beyond it.
   */
  need(offset: number, size: number, what: string): void {
    if (!Number.isInteger(offset) || offset < 0 || size < 0 || offset + size > this.length) {
      const at = Math.min(Math.max(0, offset), this.length);
      throw new FileFormatError(
        this.fileName,
        at,
        `file ends before ${what} (needs bytes ${offset}..${offset + size - 1}, file has ${this.length} bytes)`,
        `${size} bytes of ${what}`,
      );
    }
  }

  fail(offset: number, message: string, expected?: string): never {
    throw new FileFormatError(this.fileName, offset, message, expected);
  }

  u8(offset: number, what: string): number {
    this.need(offset, 1, what);
    return this.view.getUint8(offset);
  }
  i8(offset: number, what: string): number {
    this.need(offset, 1, what);
    return this.view.getInt8(offset);
  }
  u16(offset: number, what: string): number {
    this.need(offset, 2, what);
    return this.view.getUint16(offset, this.littleEndian);
  }
  i16(offset: number, what: string): number {
    this.need(offset, 2, what);
    return this.view.getInt16(offset, this.littleEndian);
  }
  u32(offset: number, what: string): number {
    this.need(offset, 4, what);
    return this.view.getUint32(offset, this.littleEndian);
  }
  i32(offset: number, what: string): number {
    this.need(offset, 4, what);
    return this.view.getInt32(offset, this.littleEndian);
  }
  f64(offset: number, what: string): number {
    this.need(offset, 8, what);
    return this.view.getFloat64(offset, this.littleEndian);
  }
  /** Unsigned 64-bit integer as a number (exact below 2^53). */
  u64(offset: number, what: string): number {
    this.need(offset, 8, what);
    const big = this.view.getBigUint64(offset, this.littleEndian);
    return Number(big);
  }
}

/** True when the platform stores multi-byte numbers little-endian (typed-array fast paths). */
export const HOST_LITTLE_ENDIAN = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

/** Byte order of a field file's multi-byte numbers. */
export type ByteOrder = "big" | "little";
