/**
 * Sample decoding shared by the SEG-2 and SEG-Y readers: one loop per binary number type, and
 * the check for samples that are not finite (NaN or infinite), which a float format can carry
 * and a float64 too large for float32 becomes.
 */
import { FileFormatError } from "../errors";
import { HOST_LITTLE_ENDIAN, type ByteCursor } from "./byte-cursor";
import { decodeIbmSamples } from "./ibm-float";

/**
 * Binary sample encodings the readers decode: two's-complement integers, IEEE 754 floats, IBM
 * System/360 hexadecimal float (SEG-Y format 1) and SEG-2's 20-bit packed float (format 3).
 */
export type SampleEncoding = "int8" | "int16" | "int32" | "float32" | "float64" | "ibm32" | "packed20";

/** Bytes taken by `n` samples of an encoding (packed20: groups of 4 samples in 10 bytes). */
export function encodedBytes(encoding: SampleEncoding, n: number): number {
  switch (encoding) {
    case "int8":
      return n;
    case "int16":
      return 2 * n;
    case "int32":
    case "float32":
    case "ibm32":
      return 4 * n;
    case "float64":
      return 8 * n;
    case "packed20":
      return 10 * Math.ceil(n / 4);
  }
}

/**
 * Decodes SEG-2 format 3 (20-bit packed floating point). Each group of four samples takes 10
 * bytes: one 16-bit word holding four 4-bit exponents (first sample in the most significant
 * nibble), then four 16-bit two's-complement mantissas; value = mantissa · 2^exponent. See
 * pipeline/io/seg2.ts for what is and is not established about this layout.
 */
function decodePacked20(view: DataView, at: number, count: number, little: boolean, out: Float32Array): void {
  for (let g = 0; g * 4 < count; g++) {
    const base = at + 10 * g;
    const exponents = view.getUint16(base, little);
    for (let k = 0; k < 4 && g * 4 + k < count; k++) {
      const e = (exponents >>> (12 - 4 * k)) & 0xf;
      const mantissa = view.getInt16(base + 2 + 2 * k, little);
      out[g * 4 + k] = mantissa * (1 << e);
    }
  }
}

/**
 * Decodes `n` samples at byte offset `at` of the cursor's file, in the cursor's byte order, into
 * a new Float32Array. The caller has checked that the bytes are present (`cursor.need`).
 */
export function decodeSamples(cur: ByteCursor, at: number, n: number, encoding: SampleEncoding): Float32Array {
  const view = cur.view;
  const little = cur.littleEndian;
  const abs = cur.bytes.byteOffset + at;
  if (encoding === "float32" && little === HOST_LITTLE_ENDIAN && abs % 4 === 0) {
    // Same byte order and aligned: one copy of the bytes.
    return new Float32Array(cur.bytes.buffer.slice(abs, abs + 4 * n) as ArrayBuffer);
  }
  const out = new Float32Array(n);
  switch (encoding) {
    case "int8":
      for (let i = 0; i < n; i++) out[i] = view.getInt8(at + i);
      break;
    case "int16":
      for (let i = 0; i < n; i++) out[i] = view.getInt16(at + 2 * i, little);
      break;
    case "int32":
      for (let i = 0; i < n; i++) out[i] = view.getInt32(at + 4 * i, little);
      break;
    case "float32":
      for (let i = 0; i < n; i++) out[i] = view.getFloat32(at + 4 * i, little);
      break;
    case "float64":
      for (let i = 0; i < n; i++) out[i] = view.getFloat64(at + 8 * i, little);
      break;
    case "ibm32":
      decodeIbmSamples(view, at, n, little, out);
      break;
    case "packed20":
      decodePacked20(view, at, n, little, out);
      break;
  }
  return out;
}

/**
 * What a reader does with a trace holding NaN or infinite samples: "mark-dead" zeroes the trace,
 * marks it dead and reports it (file, trace, count) as a warning; "refuse" rejects the file with
 * a FileFormatError at the trace's first bad sample.
 */
export type NonFiniteSamplePolicy = "mark-dead" | "refuse";

/** A trace the reader marked dead because of non-finite samples. */
export interface NonFiniteTraceWarning {
  file: string;
  /** 1-based position of the trace in the file. */
  trace: number;
  channel: number;
  /** Number of NaN or infinite samples in the trace. */
  count: number;
  /** Byte offset of the trace's header or descriptor block. */
  byteOffset: number;
  message: string;
}

/**
 * Counts the non-finite samples of one decoded trace and applies the policy: returns true when
 * the trace was zeroed and must be marked dead (the warning is pushed to `warnings`).
 *
 * @param sampleOffset byte offset of the trace's first sample (for the refusal's byte offset)
 * @param sampleBytes bytes per sample (0 for packed formats: the refusal then names the trace start)
 */
export function screenNonFinite(
  samples: Float32Array,
  where: { file: string; trace: number; channel: number; headerOffset: number; sampleOffset: number; sampleBytes: number },
  policy: NonFiniteSamplePolicy,
  warnings: NonFiniteTraceWarning[],
): boolean {
  let count = 0;
  let first = -1;
  for (let k = 0; k < samples.length; k++) {
    if (!Number.isFinite(samples[k])) {
      if (first < 0) first = k;
      count++;
    }
  }
  if (count === 0) return false;
  const what = `trace ${where.trace} (channel ${where.channel}) holds ${count} NaN or infinite sample${count === 1 ? "" : "s"}`;
  if (policy === "refuse") {
    const at = where.sampleBytes > 0 ? where.sampleOffset + first * where.sampleBytes : where.sampleOffset;
    throw new FileFormatError(where.file, at, `${what}, first at sample ${first + 1}`, "finite samples");
  }
  samples.fill(0);
  warnings.push({
    file: where.file,
    trace: where.trace,
    channel: where.channel,
    count,
    byteOffset: where.headerOffset,
    message: `${where.file}: ${what}; the trace is marked dead`,
  });
  return true;
}
