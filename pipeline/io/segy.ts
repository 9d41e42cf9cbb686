/**
 * SEG-Y revision 2.0 reader and writer.
 *
 * Standard: SEG Technical Standards Committee, 2017, "SEG-Y_r2.0: SEG-Y revision 2.0 Data Exchange
 * format". Byte positions below are the standard's 1-based positions; code uses 0-based offsets
 * (position − 1).
 *
 * File: 3200-byte textual header (EBCDIC or ASCII), 400-byte binary header (file bytes 3201–3600),
 * optional extended textual headers (3200 bytes each), then traces: a 240-byte trace header and the
 * samples. Big-endian unless the byte-order constant 16909060 (0x01020304) at 3297–3300 reads
 * swapped.
 */
import { FileFormatError } from "../errors";
import type { Component, Gather, GatherSet, TraceHeader } from "../types";
import { ByteCursor, type ByteOrder } from "./byte-cursor";
import { decodeEbcdic, encodeEbcdic, looksLikeEbcdic } from "./ebcdic";
import { encodeIbmSamples } from "./ibm-float";
import { decodeSamples, screenNonFinite, type NonFiniteSamplePolicy, type NonFiniteTraceWarning, type SampleEncoding } from "./samples";

export type { ByteOrder } from "./byte-cursor";
/** SEG-Y data sample format codes read here: 1 IBM float, 2 int32, 3 int16, 5 IEEE float32, 6 IEEE float64, 8 int8. */
export type SegyFormatCode = 1 | 2 | 3 | 5 | 6 | 8;

const TEXT_BYTES = 3200;
const BINARY_START = 3200;
const FIRST_TRACE = 3600;
const TRACE_HEADER_BYTES = 240;
/** Integer constant of bytes 3297–3300 (SEG-Y rev 2.0): 0x01020304. */
export const SEGY_BYTE_ORDER_CONSTANT = 16909060;

const SAMPLE_BYTES: Record<SegyFormatCode, number> = { 1: 4, 2: 4, 3: 2, 5: 4, 6: 8, 8: 1 };
/** Sample encoding of each SEG-Y data sample format code (rev 2.0, bytes 3225–3226). */
const ENCODING: Record<SegyFormatCode, SampleEncoding> = { 1: "ibm32", 2: "int32", 3: "int16", 5: "float32", 6: "float64", 8: "int8" };
const isFormat = (c: number): c is SegyFormatCode => c in SAMPLE_BYTES;

/** Binary file header fields we use, by our own names (standard positions in the comments). */
export interface SegyBinaryHeader {
  /** 3205–3208 line number. */
  lineNumber: number;
  /** 3213–3214 data traces per ensemble. */
  tracesPerEnsemble: number;
  /** 3217–3218 sample interval, µs (or the rev 2 extended double at 3273–3280 when non-zero). */
  sampleIntervalUs: number;
  /** 3221–3222 samples per trace (or the rev 2 extended 32-bit value at 3269–3272). */
  sampleCount: number;
  /** 3225–3226 data sample format code. */
  formatCode: SegyFormatCode;
  /** 3255–3256 measurement system: 1 metres, 2 feet. */
  measurementSystem: number;
  /** 3501 major and 3502 minor SEG-Y format revision. */
  revisionMajor: number;
  revisionMinor: number;
  /** 3503–3504 fixed-length trace flag (1: every trace has the binary header's sample count). */
  fixedLengthTraces: boolean;
  /** 3505–3506 number of 3200-byte extended textual header records (−1: variable, ended by an EndText stanza). */
  extendedTextHeaders: number;
}

/** Trace header fields we use, by our own names (positions in the comments), scalars applied. */
export interface SegyTraceHeader {
  /** 1–4 trace sequence number within line. */
  sequenceInLine: number;
  /** 9–12 original field record number. */
  fieldRecord: number;
  /** 13–16 trace number within the original field record (channel). */
  channel: number;
  /** 17–20 energy source point number. */
  sourcePointNumber: number;
  /** 29–30 trace identification code (1 time-domain seismic, 2 dead, …). */
  traceIdCode: number;
  /** 31–32 number of vertically summed traces yielding this trace. */
  verticalStackCount: number;
  /** 37–40 source–receiver offset, as stored (integer, no scalar applies). */
  offset: number;
  /** 41–44 receiver group elevation, m, with the elevation scalar 69–70 applied. */
  receiverElevation: number;
  /** 45–48 surface elevation at source, m, scaled. */
  sourceSurfaceElevation: number;
  /** 49–52 source depth below surface, m, scaled. */
  sourceDepth: number;
  /** 69–70 elevation scalar as stored. */
  elevationScalar: number;
  /** 71–72 coordinate scalar as stored. */
  coordinateScalar: number;
  /** 73–76 source X, scaled. */
  sourceX: number;
  /** 77–80 source Y, scaled. */
  sourceY: number;
  /** 81–84 group X, scaled. */
  groupX: number;
  /** 85–88 group Y, scaled. */
  groupY: number;
  /** 109–110 delay recording time, ms, with the time scalar 215–216 applied. */
  delayMs: number;
  /** 115–116 number of samples in this trace. */
  sampleCount: number;
  /** 117–118 sample interval of this trace, µs. */
  sampleIntervalUs: number;
}

export interface SegyTrace {
  header: SegyTraceHeader;
  samples: Float32Array;
  /** Byte offset of this trace's header in the file. */
  headerOffset: number;
}

export interface SegyFile {
  byteOrder: ByteOrder;
  textEncoding: "ebcdic" | "ascii";
  /** The 3200-byte textual header as text (40 lines of 80 characters joined by "\n"). */
  textHeader: string;
  binary: SegyBinaryHeader;
  traces: SegyTrace[];
}

/**
 * Applies a SEG-Y scalar (rev 2.0, trace header bytes 69–72 and 215–216): positive multiplies,
 * negative divides by its magnitude, zero means 1.
 */
export function applySegyScalar(value: number, scalar: number): number {
  if (scalar === 0) return value;
  return scalar > 0 ? value * scalar : value / -scalar;
}

function textOf(bytes: Uint8Array): { text: string; encoding: "ebcdic" | "ascii" } {
  const encoding = looksLikeEbcdic(bytes) ? "ebcdic" : "ascii";
  let raw = "";
  if (encoding === "ebcdic") raw = decodeEbcdic(bytes);
  else for (let i = 0; i < bytes.length; i++) raw += String.fromCharCode(bytes[i]);
  const lines: string[] = [];
  for (let i = 0; i < raw.length; i += 80) lines.push(raw.slice(i, i + 80).replace(/[\0\s]+$/, ""));
  return { text: lines.join("\n"), encoding };
}

/** Reads the format code in both byte orders and tells which makes sense. */
function detectByteOrder(cur: ByteCursor): ByteOrder {
  const v = cur.view;
  const constant = v.getUint32(3296, false);
  if (constant === SEGY_BYTE_ORDER_CONSTANT) return "big";
  if (constant === 0x04030201) return "little";
  const big = v.getUint16(3224, false);
  const little = v.getUint16(3224, true);
  if (isFormat(big)) return "big";
  if (isFormat(little)) return "little";
  return cur.fail(
    3224,
    `not a readable SEG-Y file: data sample format code reads ${big} (big-endian) or ${little} (little-endian)`,
    "1 (IBM float), 2 (int32), 3 (int16), 5 (IEEE float), 6 (IEEE double) or 8 (int8) at bytes 3225-3226",
  );
}

/**
 * True when the bytes look like a SEG-Y file: at least the textual and binary headers, a known
 * sample format code in either byte order and a plausible sample interval and count.
 */
export function looksLikeSegy(bytes: Uint8Array): boolean {
  if (bytes.length < FIRST_TRACE) return false;
  const v = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  for (const little of [false, true]) {
    const format = v.getUint16(3224, little);
    const dt = v.getUint16(3216, little);
    const ns = v.getUint16(3220, little);
    const extNs = v.getInt32(3268, little);
    if (isFormat(format) && (dt > 0 || v.getFloat64(3272, little) > 0) && (ns > 0 || extNs > 0)) return true;
  }
  return false;
}

function readTraceHeader(cur: ByteCursor, at: number): SegyTraceHeader {
  const i16 = (pos: number, what: string) => cur.i16(at + pos - 1, what);
  const i32 = (pos: number, what: string) => cur.i32(at + pos - 1, what);
  const elevationScalar = i16(69, "elevation scalar");
  const coordinateScalar = i16(71, "coordinate scalar");
  const timeScalar = i16(215, "time scalar");
  const c = (pos: number, what: string) => applySegyScalar(i32(pos, what), coordinateScalar);
  const e = (pos: number, what: string) => applySegyScalar(i32(pos, what), elevationScalar);
  return {
    sequenceInLine: i32(1, "trace sequence number"),
    fieldRecord: i32(9, "field record number"),
    channel: i32(13, "trace number within field record"),
    sourcePointNumber: i32(17, "energy source point number"),
    traceIdCode: i16(29, "trace identification code"),
    verticalStackCount: i16(31, "vertically summed traces"),
    offset: i32(37, "offset"),
    receiverElevation: e(41, "receiver group elevation"),
    sourceSurfaceElevation: e(45, "surface elevation at source"),
    sourceDepth: e(49, "source depth"),
    elevationScalar,
    coordinateScalar,
    sourceX: c(73, "source X"),
    sourceY: c(77, "source Y"),
    groupX: c(81, "group X"),
    groupY: c(85, "group Y"),
    delayMs: applySegyScalar(i16(109, "delay recording time"), timeScalar),
    sampleCount: cur.u16(at + 114, "number of samples"),
    sampleIntervalUs: cur.u16(at + 116, "sample interval"),
  };
}

/**
 * Reads a SEG-Y file (revisions 0, 1 and 2.0 layouts).
 *
 * Byte order: the rev 2.0 constant at 3297–3300 when present, else whichever byte order gives a
 * known sample format code at 3225–3226. Extended textual headers (3505–3506) are skipped, a
 * variable count (−1) up to the record holding "((SEG: EndText))". Traces with additional 240-byte
 * headers (3507–3510 non-zero) are not supported and rejected.
 *
 * @throws FileFormatError naming the file and byte offset for any malformed or truncated file.
 */
export function readSegy(bytes: Uint8Array, fileName: string): SegyFile {
  const cur = new ByteCursor(fileName, bytes, false);
  cur.need(0, TEXT_BYTES, "the 3200-byte textual header");
  cur.need(BINARY_START, 400, "the 400-byte binary header");
  const byteOrder = detectByteOrder(cur);
  cur.littleEndian = byteOrder === "little";
  const { text, encoding } = textOf(bytes.subarray(0, TEXT_BYTES));

  const formatRaw = cur.u16(3224, "data sample format code");
  if (!isFormat(formatRaw)) {
    cur.fail(3224, `data sample format code ${formatRaw} is not supported`, "1, 2, 3, 5, 6 or 8");
  }
  const formatCode = formatRaw as SegyFormatCode;
  const revisionMajor = cur.u8(3500, "format revision");
  const revisionMinor = cur.u8(3501, "format revision");
  let sampleIntervalUs = cur.u16(3216, "sample interval");
  let sampleCount = cur.u16(3220, "samples per trace");
  if (revisionMajor >= 2) {
    const extDt = cur.f64(3272, "extended sample interval");
    if (extDt > 0 && Number.isFinite(extDt)) sampleIntervalUs = extDt;
    if (sampleCount === 0) sampleCount = Math.max(0, cur.i32(3268, "extended samples per trace"));
  }
  const fixedLengthTraces = cur.u16(3502, "fixed length trace flag") === 1;
  const extendedTextHeaders = cur.i16(3504, "number of extended textual headers");
  if (revisionMajor >= 2) {
    const extraHeaders = cur.i32(3506, "maximum additional trace headers");
    if (extraHeaders !== 0) {
      cur.fail(3506, `${extraHeaders} additional 240-byte trace headers per trace are not supported`, "0");
    }
  }
  const binary: SegyBinaryHeader = {
    lineNumber: cur.i32(3204, "line number"),
    tracesPerEnsemble: cur.u16(3212, "data traces per ensemble"),
    sampleIntervalUs,
    sampleCount,
    formatCode,
    measurementSystem: cur.u16(3254, "measurement system"),
    revisionMajor,
    revisionMinor,
    fixedLengthTraces,
    extendedTextHeaders,
  };

  let offset = FIRST_TRACE;
  if (extendedTextHeaders > 0) {
    offset += TEXT_BYTES * extendedTextHeaders;
    cur.need(FIRST_TRACE, TEXT_BYTES * extendedTextHeaders, `${extendedTextHeaders} extended textual headers`);
  } else if (extendedTextHeaders === -1) {
    for (;;) {
      cur.need(offset, TEXT_BYTES, "an extended textual header (looking for ((SEG: EndText)))");
      const rec = textOf(bytes.subarray(offset, offset + TEXT_BYTES)).text.replace(/\s+/g, "");
      offset += TEXT_BYTES;
      if (rec.toUpperCase().includes("((SEG:ENDTEXT))")) break;
    }
  } else if (extendedTextHeaders < -1) {
    cur.fail(3504, `number of extended textual headers is ${extendedTextHeaders}`, "0 or more, or -1 for a variable count");
  }
  if (revisionMajor >= 2) {
    // Rev 2.0 bytes 3521–3528: byte offset of the first trace, unsigned 64-bit (0: not stated).
    const firstTrace = cur.u64(3520, "byte offset of first trace");
    if (firstTrace > 0) {
      if (firstTrace < offset || firstTrace > bytes.length) {
        cur.fail(3520, `byte offset of first trace (bytes 3521-3528) is ${firstTrace}`, `0, or an offset from ${offset} to ${bytes.length}`);
      }
      offset = firstTrace;
    }
  }

  const traces: SegyTrace[] = [];
  while (offset < bytes.length) {
    const at = offset;
    const index = traces.length + 1;
    cur.need(at, TRACE_HEADER_BYTES, `trace ${index} header`);
    const header = readTraceHeader(cur, at);
    const ns = fixedLengthTraces || header.sampleCount === 0 ? sampleCount : header.sampleCount;
    if (header.sampleIntervalUs === 0) header.sampleIntervalUs = sampleIntervalUs;
    if (ns <= 0) cur.fail(3220, "samples per trace is 0 in the binary header and the trace header", "a positive sample count");
    const dataBytes = ns * SAMPLE_BYTES[formatCode];
    cur.need(at + TRACE_HEADER_BYTES, dataBytes, `trace ${index} samples (${ns} samples of format ${formatCode})`);
    header.sampleCount = ns;
    traces.push({ header, samples: decodeSamples(cur, at + TRACE_HEADER_BYTES, ns, ENCODING[formatCode]), headerOffset: at });
    offset = at + TRACE_HEADER_BYTES + dataBytes;
  }
  if (traces.length === 0) cur.fail(offset, "the file holds no traces", "at least one 240-byte trace header after the headers");
  if (revisionMajor >= 2) {
    // Rev 2.0 bytes 3513–3520 announce the trace count (unsigned 64-bit, 0: not stated): fewer
    // traces means the file was cut at a trace boundary.
    const announced = cur.u64(3512, "number of traces in file");
    if (announced > 0 && announced !== traces.length) {
      cur.fail(offset, `the file holds ${traces.length} traces but its binary header announces ${announced}`, `${announced} traces`);
    }
  }
  if (!(binary.sampleIntervalUs > 0) && !(traces[0].header.sampleIntervalUs > 0)) {
    cur.fail(3216, "sample interval is 0 in the binary header and the first trace header", "a positive interval in microseconds");
  }
  return { byteOrder, textEncoding: encoding, textHeader: text, binary, traces };
}

export interface SegyToGathersOptions {
  /** Base gather id, e.g. the file name without extension. */
  id: string;
  /** Recorded component. @default "z" */
  component?: Component;
  /** Traces with NaN or infinite samples: "mark-dead" (zeroed, dead, warned) or "refuse" the file. @default "mark-dead" */
  nonFiniteSamples?: NonFiniteSamplePolicy;
  /** Receives one warning per trace marked dead for non-finite samples. */
  warnings?: NonFiniteTraceWarning[];
}

/**
 * Converts a read SEG-Y file to gathers, one per field record number (trace header 9–12), in the
 * order records first appear. A file with one record gives one gather named `id`; several give
 * `id-r<record>`. Positions come from source X / group X (scaled), depths from the source depth
 * and receiver elevation; when both X are zero and the offset is not, positions are unknown (NaN)
 * and the stored offset is kept. Traces with identification code 2 or only zero samples are dead;
 * so are traces holding NaN or infinite samples (zeroed, with a warning naming file, trace and
 * count), unless `nonFiniteSamples` is "refuse".
 *
 * @throws FileFormatError when traces of one record differ in sample count or interval.
 */
export function segyToGathers(file: SegyFile, fileName: string, options: SegyToGathersOptions): Gather[] {
  const component = options.component ?? "z";
  const nonFinite = options.nonFiniteSamples ?? "mark-dead";
  const warnings = options.warnings ?? [];
  const position = new Map<SegyTrace, number>();
  file.traces.forEach((t, i) => position.set(t, i + 1));
  const groups = new Map<number, SegyTrace[]>();
  for (const t of file.traces) {
    const list = groups.get(t.header.fieldRecord);
    if (list) list.push(t);
    else groups.set(t.header.fieldRecord, [t]);
  }
  const many = groups.size > 1;
  const gathers: Gather[] = [];
  for (const [record, traces] of groups) {
    const first = traces[0].header;
    const ns = first.sampleCount;
    // The binary header may carry the exact interval (rev 2.0 extended double) where the trace
    // header holds it rounded to whole microseconds.
    const dtUs =
      first.sampleIntervalUs > 0 && Math.round(file.binary.sampleIntervalUs) !== first.sampleIntervalUs
        ? first.sampleIntervalUs
        : file.binary.sampleIntervalUs;
    const dtTrace = first.sampleIntervalUs;
    const data = new Float32Array(traces.length * ns);
    const headers: TraceHeader[] = traces.map((t, i) => {
      const h = t.header;
      if (h.sampleCount !== ns) {
        throw new FileFormatError(fileName, t.headerOffset + 114, `trace has ${h.sampleCount} samples, the first trace of record ${record} has ${ns}`, `${ns} samples`);
      }
      if (h.sampleIntervalUs !== dtTrace) {
        throw new FileFormatError(fileName, t.headerOffset + 116, `trace sample interval ${h.sampleIntervalUs} µs differs from ${dtTrace} µs`, `${dtTrace} µs`);
      }
      data.set(t.samples, i * ns);
      const row = data.subarray(i * ns, (i + 1) * ns);
      const width = SAMPLE_BYTES[file.binary.formatCode];
      const bad = screenNonFinite(
        row,
        { file: fileName, trace: position.get(t) ?? i + 1, channel: h.channel > 0 ? h.channel : i + 1, headerOffset: t.headerOffset, sampleOffset: t.headerOffset + TRACE_HEADER_BYTES, sampleBytes: width },
        nonFinite,
        warnings,
      );
      let allZero = true;
      for (let k = 0; k < ns; k++) if (row[k] !== 0) { allZero = false; break; }
      const known = !(h.sourceX === 0 && h.groupX === 0 && h.offset !== 0);
      const sourceX = known ? h.sourceX : NaN;
      const receiverX = known ? h.groupX : NaN;
      return {
        sourceFile: fileName,
        channel: h.channel > 0 ? h.channel : i + 1,
        sourcePoint: 0,
        blow: 0,
        sourceX,
        sourceZ: h.sourceDepth - h.sourceSurfaceElevation,
        receiverX,
        receiverZ: -h.receiverElevation,
        offset: known ? receiverX - sourceX : h.offset,
        stackCount: h.verticalStackCount >= 1 ? h.verticalStackCount : 1,
        component,
        dead: h.traceIdCode === 2 || allZero || bad,
      };
    });
    gathers.push({
      id: many ? `${options.id}-r${record}` : options.id,
      sampleIntervalS: dtUs * 1e-6,
      sampleCount: ns,
      startTimeS: first.delayMs * 1e-3,
      traces: headers,
      data,
    });
  }
  return gathers;
}

// ---------------------------------------------------------------------------------------------
// Writer

/** One trace to write, header fields in SI units (metres, seconds). */
export interface SegyWriteTrace {
  fieldRecord: number;
  channel: number;
  sourcePointNumber: number;
  sourceX: number;
  /** Source depth below the surface, m. */
  sourceZ: number;
  receiverX: number;
  /** Receiver depth below the surface, m (written as elevation −depth). */
  receiverZ: number;
  /** Signed offset, m (stored rounded to whole metres; the coordinates keep centimetres). */
  offset: number;
  stackCount: number;
  dead: boolean;
  samples: ArrayLike<number>;
}

export interface SegyWriteOptions {
  /** Byte order. @default "big" (the standard's default) */
  byteOrder?: ByteOrder;
  /** Sample format: 5 IEEE float32 or 1 IBM float. @default 5 */
  formatCode?: 1 | 5;
  /** Textual header encoding. @default "ebcdic" */
  textEncoding?: "ebcdic" | "ascii";
  /** Lines for the textual header (at most 38; lines 39 and 40 are the rev 2.0 closing lines). */
  textLines?: string[];
  /**
   * Coordinate and elevation scalar (bytes 69–72): −100 stores centimetres. @default -100
   */
  coordinateScalar?: number;
  /** Line number for the binary header (3205–3208). @default 1 */
  lineNumber?: number;
}

function textHeaderBytes(lines: string[], encoding: "ebcdic" | "ascii"): Uint8Array {
  if (lines.length > 38) throw new RangeError(`writeSegy: textLines has ${lines.length} lines; at most 38 fit before the closing lines`);
  const all: string[] = [];
  for (let i = 0; i < 40; i++) {
    const n = String(i + 1).padStart(2, " ");
    let body = lines[i] ?? "";
    if (i === 38) body = "SEG-Y_REV2.0";
    if (i === 39) body = "END TEXTUAL HEADER";
    all.push(`C${n} ${body}`.slice(0, 80).padEnd(80, " "));
  }
  const text = all.join("");
  if (encoding === "ebcdic") return encodeEbcdic(text);
  const out = new Uint8Array(TEXT_BYTES);
  for (let i = 0; i < TEXT_BYTES; i++) {
    const c = text.charCodeAt(i);
    out[i] = c < 128 ? c : 0x3f;
  }
  return out;
}

/** Smallest power-of-ten divisor (1…10000) that stores `ms` exactly in 16 bits, as a time scalar. */
function timeScalarFor(ms: number): { stored: number; scalar: number } {
  for (const d of [1, 10, 100, 1000, 10000]) {
    const stored = Math.round(ms * d);
    if (Math.abs(stored / d - ms) < 1e-9 && Math.abs(stored) <= 32767) return { stored, scalar: d === 1 ? 1 : -d };
  }
  const stored = Math.round(ms);
  if (Math.abs(stored) > 32767) throw new RangeError(`writeSegy: start time ${ms} ms does not fit the 16-bit delay field`);
  return { stored, scalar: 1 };
}

/**
 * Writes a SEG-Y rev 2.0 file: textual header (our lines, then "SEG-Y_REV2.0" and
 * "END TEXTUAL HEADER"), binary header (sample interval, samples, format, metres, byte-order
 * constant, revision 2.0, fixed-length traces, trace count at 3513–3520, first-trace offset at
 * 3521–3528), then every trace
 * with its 240-byte header.
 *
 * @param sampleIntervalS sample interval, s (stored in whole µs; the exact value also goes in the
 *   rev 2.0 extended sample interval)
 * @param startTimeS time of the first sample, s (delay recording time, ms, with a time scalar)
 */
export function writeSegy(
  input: { sampleIntervalS: number; sampleCount: number; startTimeS: number; traces: SegyWriteTrace[] },
  options: SegyWriteOptions = {},
): Uint8Array {
  const { sampleIntervalS, sampleCount, startTimeS, traces } = input;
  if (!(sampleIntervalS > 0)) throw new RangeError(`writeSegy: sampleIntervalS must be positive, got ${sampleIntervalS}`);
  if (!Number.isInteger(sampleCount) || sampleCount <= 0) throw new RangeError(`writeSegy: sampleCount must be a positive integer, got ${sampleCount}`);
  const format = options.formatCode ?? 5;
  if (format !== 1 && format !== 5) throw new RangeError(`writeSegy: formatCode must be 1 or 5, got ${String(format)}`);
  const little = (options.byteOrder ?? "big") === "little";
  const scalar = options.coordinateScalar ?? -100;
  if (![1, 10, 100, 1000, 10000, -10, -100, -1000, -10000].includes(scalar)) {
    throw new RangeError(`writeSegy: coordinateScalar must be ±1, ±10, ±100, ±1000 or ±10000, got ${scalar}`);
  }
  const store = (v: number, what: string) => {
    const s = Math.round(scalar < 0 ? v * -scalar : v / scalar);
    if (!Number.isFinite(v) || Math.abs(s) > 2147483647) throw new RangeError(`writeSegy: ${what} ${v} cannot be stored with scalar ${scalar}`);
    return s;
  };
  const dtUs = sampleIntervalS * 1e6;
  const dtStored = Math.round(dtUs);
  if (dtStored < 1 || dtStored > 65535) throw new RangeError(`writeSegy: sample interval ${dtUs} µs does not fit the 16-bit field`);
  const nsStored = sampleCount <= 65535 ? sampleCount : 0;
  const delay = timeScalarFor(startTimeS * 1e3);
  const traceBytes = TRACE_HEADER_BYTES + 4 * sampleCount;
  const out = new Uint8Array(FIRST_TRACE + traces.length * traceBytes);
  const view = new DataView(out.buffer);
  out.set(textHeaderBytes(options.textLines ?? [], options.textEncoding ?? "ebcdic"), 0);

  const b = (pos: number) => BINARY_START + pos - 3201;
  view.setInt32(b(3201), 1, little); // job identification number
  view.setInt32(b(3205), options.lineNumber ?? 1, little);
  view.setInt32(b(3209), 1, little); // reel number
  const perRecord = new Map<number, number>();
  for (const t of traces) perRecord.set(t.fieldRecord, (perRecord.get(t.fieldRecord) ?? 0) + 1);
  view.setUint16(b(3213), Math.min(65535, Math.max(0, ...perRecord.values())), little);
  view.setUint16(b(3217), dtStored, little);
  view.setUint16(b(3219), dtStored, little);
  view.setUint16(b(3221), nsStored, little);
  view.setUint16(b(3223), nsStored, little);
  view.setUint16(b(3225), format, little);
  view.setUint16(b(3227), 1, little); // ensemble fold
  view.setInt16(b(3229), 1, little); // trace sorting: as recorded
  view.setUint16(b(3255), 1, little); // measurement system: metres
  view.setInt32(b(3269), sampleCount, little); // extended samples per trace
  view.setFloat64(b(3273), dtUs, little); // extended sample interval, µs
  view.setFloat64(b(3281), dtUs, little);
  view.setInt32(b(3289), sampleCount, little);
  view.setUint32(b(3297), SEGY_BYTE_ORDER_CONSTANT, little);
  out[b(3501)] = 2; // major revision
  out[b(3502)] = 0; // minor revision
  view.setUint16(b(3503), 1, little); // fixed-length traces
  view.setInt16(b(3505), 0, little); // no extended textual headers
  view.setInt32(b(3507), 0, little); // no additional trace headers
  view.setBigUint64(b(3513), BigInt(traces.length), little); // 3513–3520 number of traces
  view.setBigUint64(b(3521), BigInt(FIRST_TRACE), little); // 3521–3528 byte offset of first trace

  const perRecordIndex = new Map<number, number>();
  traces.forEach((t, i) => {
    if (t.samples.length !== sampleCount) throw new RangeError(`writeSegy: trace ${i + 1} has ${t.samples.length} samples, expected ${sampleCount}`);
    const at = FIRST_TRACE + i * traceBytes;
    const h = (pos: number) => at + pos - 1;
    const inRecord = (perRecordIndex.get(t.fieldRecord) ?? 0) + 1;
    perRecordIndex.set(t.fieldRecord, inRecord);
    view.setInt32(h(1), i + 1, little);
    view.setInt32(h(5), i + 1, little);
    view.setInt32(h(9), t.fieldRecord, little);
    view.setInt32(h(13), t.channel, little);
    view.setInt32(h(17), t.sourcePointNumber, little);
    view.setInt32(h(21), t.fieldRecord, little); // ensemble number
    view.setInt32(h(25), inRecord, little);
    view.setInt16(h(29), t.dead ? 2 : 1, little);
    view.setInt16(h(31), Math.min(32767, Math.max(1, Math.round(t.stackCount))), little);
    view.setInt16(h(33), 1, little);
    view.setInt16(h(35), 1, little); // data use: production
    view.setInt32(h(37), Number.isFinite(t.offset) ? Math.round(t.offset) : 0, little);
    view.setInt32(h(41), store(-t.receiverZ, "receiver elevation"), little);
    view.setInt32(h(45), 0, little);
    view.setInt32(h(49), store(t.sourceZ, "source depth"), little);
    view.setInt16(h(69), scalar, little);
    view.setInt16(h(71), scalar, little);
    view.setInt32(h(73), store(t.sourceX, "source X"), little);
    view.setInt32(h(81), store(t.receiverX, "receiver X"), little);
    view.setInt16(h(89), 1, little); // coordinate units: length
    view.setInt16(h(109), delay.stored, little);
    view.setUint16(h(115), nsStored, little);
    view.setUint16(h(117), dtStored, little);
    view.setInt16(h(215), delay.scalar, little);
    const d = at + TRACE_HEADER_BYTES;
    if (format === 1) encodeIbmSamples(t.samples, view, d, little);
    else for (let k = 0; k < sampleCount; k++) view.setFloat32(d + 4 * k, t.samples[k], little);
  });
  return out;
}

export interface GatherSetSegyOptions extends SegyWriteOptions {
  /** Survey or line name for the textual header. */
  title?: string;
}

/**
 * Writes every gather of a set as one SEG-Y rev 2.0 file, traces in gather order. Field record
 * number = gather position (1-based), channel = the trace's channel, energy source point = the
 * trace's source point. All gathers must share sample interval, sample count and start time.
 * Positions that are not known (NaN) are written as 0 with the offset kept when finite.
 *
 * @throws RangeError when the gathers differ in sampling or the set is empty.
 */
export function writeGatherSetAsSegy(set: GatherSet, options: GatherSetSegyOptions = {}): Uint8Array {
  if (set.gathers.length === 0) throw new RangeError("writeGatherSetAsSegy: the gather set is empty");
  const g0 = set.gathers[0];
  for (const g of set.gathers) {
    if (g.sampleCount !== g0.sampleCount || Math.abs(g.sampleIntervalS - g0.sampleIntervalS) > 1e-12 || Math.abs(g.startTimeS - g0.startTimeS) > 1e-12) {
      throw new RangeError(
        `writeGatherSetAsSegy: gather ${g.id} (${g.sampleCount} samples at ${g.sampleIntervalS} s from ${g.startTimeS} s) differs from gather ${g0.id} (${g0.sampleCount} at ${g0.sampleIntervalS} s from ${g0.startTimeS} s); one SEG-Y file needs one sampling`,
      );
    }
  }
  const ns = g0.sampleCount;
  const fin = (v: number) => (Number.isFinite(v) ? v : 0);
  const traces: SegyWriteTrace[] = [];
  set.gathers.forEach((g, gi) => {
    g.traces.forEach((h, ti) => {
      traces.push({
        fieldRecord: gi + 1,
        channel: h.channel,
        sourcePointNumber: h.sourcePoint,
        sourceX: fin(h.sourceX),
        sourceZ: fin(h.sourceZ),
        receiverX: fin(h.receiverX),
        receiverZ: fin(h.receiverZ),
        offset: h.offset,
        stackCount: h.stackCount,
        dead: h.dead,
        samples: g.data.subarray(ti * ns, (ti + 1) * ns),
      });
    });
  });
  const lines = [
    `CLIENT/SURVEY: ${options.title ?? "(untitled)"}`,
    "WRITTEN BY TRACEWRIGHT: SEG-Y REV 2.0, BIG-ENDIAN UNLESS THE BYTE-ORDER WORD SAYS OTHERWISE",
    `GATHERS: ${set.gathers.length}  TRACES: ${traces.length}  SAMPLES PER TRACE: ${ns}`,
    `SAMPLE INTERVAL: ${g0.sampleIntervalS * 1e6} MICROSECONDS  FIRST SAMPLE AT ${g0.startTimeS * 1e3} MS`,
    "FIELD RECORD NUMBER (BYTES 9-12) = GATHER POSITION; CHANNEL IN BYTES 13-16",
    "COORDINATES IN METRES WITH SCALAR IN BYTES 71-72; OFFSET (37-40) IN WHOLE METRES",
    "GATHER IDS IN ORDER:",
    ...chunkIds(set.gathers.map((g) => g.id), 76).slice(0, 30),
    ...(options.textLines ?? []),
  ].slice(0, 38);
  return writeSegy({ sampleIntervalS: g0.sampleIntervalS, sampleCount: ns, startTimeS: g0.startTimeS, traces }, { ...options, textLines: lines });
}

function chunkIds(ids: string[], width: number): string[] {
  const lines: string[] = [];
  let line = "";
  for (const id of ids) {
    if (line.length + id.length + 1 > width) {
      lines.push(line);
      line = "";
    }
    line += (line ? " " : "") + id;
  }
  if (line) lines.push(line);
  return lines;
}
