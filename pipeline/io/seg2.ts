/**
 * SEG-2 reader and writer.
 *
 * Standard: Pullan, S. E. (chair), 1990, "Recommended standard for seismic (/radar) data files in
 * the personal computer environment", Geophysics 55(9), 1260–1271 (the SEG-2 format).
 *
 * File layout used here (byte offsets 0-based, numbers in the file's own byte order):
 *
 * File descriptor block
 *   0–1   block ID 0x3a55 (read little-endian as 0x3a55 → little-endian file: bytes 55 3a)
 *   2–3   revision number
 *   4–5   M, size of the trace pointer sub-block in bytes (at least 4·N)
 *   6–7   N, number of traces
 *   8     size of the string terminator (1 or 2)
 *   9–10  string terminator characters
 *   11    size of the line terminator (0, 1 or 2)
 *   12–13 line terminator characters
 *   14–31 reserved
 *   32 …  trace pointer sub-block: N unsigned 32-bit byte offsets of the trace descriptor blocks
 *   32+M … file descriptor strings
 *
 * Trace descriptor block (at each pointer)
 *   0–1   block ID 0x4422
 *   2–3   X, size of this block in bytes
 *   4–7   Y, size of the following data block in bytes
 *   8–11  number of samples
 *   12    data format code (1 int16, 2 int32, 3 20-bit packed float, 4 float32, 5 float64)
 *   13–31 reserved
 *   32 …  trace descriptor strings; the data block starts at X
 *
 * Strings: each is preceded by an unsigned 16-bit count giving the offset from the start of this
 * string's count to the start of the next string's count; the text is "KEYWORD value" ended by the
 * string terminator; a count of zero (or the end of the block) ends the list. Multi-line values
 * (NOTE) separate lines with the line terminator.
 */
import type { Component, Gather, TraceHeader } from "../types";
import { FileFormatError } from "../errors";
import { ByteCursor, type ByteOrder } from "./byte-cursor";
import { decodeSamples, encodedBytes, screenNonFinite, type NonFiniteSamplePolicy, type NonFiniteTraceWarning, type SampleEncoding } from "./samples";

/** SEG-2 data format codes. */
export type Seg2FormatCode = 1 | 2 | 3 | 4 | 5;

/** Sample encoding of each SEG-2 data format code. */
const ENCODING: Record<Seg2FormatCode, SampleEncoding> = { 1: "int16", 2: "int32", 3: "packed20", 4: "float32", 5: "float64" };

/** One trace as read from a SEG-2 file. */
export interface Seg2Trace {
  /** Trace descriptor keywords (upper case) and their text values. */
  strings: Record<string, string>;
  sampleCount: number;
  formatCode: Seg2FormatCode;
  /** Samples as stored (no descaling applied). */
  samples: Float32Array;
  /** Byte offset of this trace's descriptor block in the file. */
  descriptorOffset: number;
  /** Byte offset of this trace's first sample in the file. */
  dataOffset: number;
}

/** A SEG-2 file as read. */
export interface Seg2File {
  byteOrder: ByteOrder;
  revision: number;
  /** File descriptor keywords (upper case) and their text values. */
  fileStrings: Record<string, string>;
  traces: Seg2Trace[];
}

export const SEG2_FILE_ID = 0x3a55;
export const SEG2_TRACE_ID = 0x4422;

/** Bytes `samples` samples take per format code (format 3: 4 samples in 10 bytes). */
function dataBytes(format: Seg2FormatCode, samples: number): number {
  return encodedBytes(ENCODING[format], samples);
}

/** True when the first two bytes are the SEG-2 file descriptor block ID in either byte order. */
export function isSeg2(bytes: Uint8Array): boolean {
  return bytes.length >= 2 && ((bytes[0] === 0x55 && bytes[1] === 0x3a) || (bytes[0] === 0x3a && bytes[1] === 0x55));
}

interface Terminators {
  stringTerm: Uint8Array;
  lineTerm: Uint8Array;
}

function indexOfSequence(bytes: Uint8Array, seq: Uint8Array, from: number, to: number): number {
  if (seq.length === 0) return -1;
  outer: for (let i = from; i + seq.length <= to; i++) {
    for (let k = 0; k < seq.length; k++) if (bytes[i + k] !== seq[k]) continue outer;
    return i;
  }
  return -1;
}

function latin1(bytes: Uint8Array, from: number, to: number): string {
  let s = "";
  for (let i = from; i < to; i++) s += String.fromCharCode(bytes[i]);
  return s;
}

/**
 * Reads the string list that starts at `start` and may not run past `end`.
 * Keywords are upper-cased; a repeated keyword appends its value on a new line.
 */
function readStrings(cur: ByteCursor, start: number, end: number, term: Terminators, where: string): Record<string, string> {
  const out: Record<string, string> = {};
  const bytes = cur.bytes;
  let off = start;
  while (off + 2 <= end) {
    const count = cur.u16(off, `${where} string length`);
    if (count === 0) break;
    if (count < 2) cur.fail(off, `${where} string length ${count} is too small`, "a length of at least 2 (it counts its own two bytes)");
    if (off + count > end) {
      cur.fail(off, `${where} string of ${count} bytes runs past the end of its block at byte ${end}`, `a string that ends by byte ${end}`);
    }
    const textStart = off + 2;
    const textEndLimit = off + count;
    const t = indexOfSequence(bytes, term.stringTerm, textStart, textEndLimit);
    let textEnd = t >= 0 ? t : textEndLimit;
    // Trailing NUL padding is common even when the terminator is something else.
    while (textEnd > textStart && bytes[textEnd - 1] === 0) textEnd--;
    let text = latin1(bytes, textStart, textEnd);
    if (term.lineTerm.length > 0) text = text.split(latin1(term.lineTerm, 0, term.lineTerm.length)).join("\n");
    text = text.replace(/^[\s\0]+/, "");
    if (text.length > 0) {
      const m = /^(\S+)\s*([\s\S]*)$/.exec(text);
      const key = (m ? m[1] : text).toUpperCase();
      const value = (m ? m[2] : "").replace(/\s+$/, "");
      out[key] = key in out ? `${out[key]}\n${value}` : value;
    }
    off += count;
  }
  return out;
}

/**
 * Encodes samples in the format-3 layout that {@link readSeg2} decodes: per group of four,
 * one 16-bit word of four 4-bit exponents (first sample in the most significant nibble), then four
 * 16-bit two's-complement mantissas; value = mantissa · 2^exponent. Rounds to the nearest
 * representable value; magnitudes above 32767 · 2^15 saturate.
 */
function encodeFormat3(samples: ArrayLike<number>, view: DataView, at: number, little: boolean): void {
  const n = samples.length;
  for (let g = 0; g * 4 < n; g++) {
    const base = at + 10 * g;
    let exponents = 0;
    for (let k = 0; k < 4; k++) {
      const i = g * 4 + k;
      const v = i < n ? samples[i] : 0;
      let e = 0;
      while (e < 15 && Math.abs(Math.round(v / (1 << e))) > 32767) e++;
      let m = Math.round(v / (1 << e));
      if (m > 32767) m = 32767;
      if (m < -32768) m = -32768;
      exponents |= e << (12 - 4 * k);
      view.setInt16(base + 2 + 2 * k, m, little);
    }
    view.setUint16(base, exponents, little);
  }
}

/**
 * Reads a SEG-2 file.
 *
 * Format 3 (20-bit packed floating point): decoded as groups of four samples in 10 bytes, a 16-bit
 * word holding the four 4-bit binary exponents (first sample in the most significant nibble) then
 * four 16-bit two's-complement mantissas, value = mantissa · 2^exponent. This follows the SEG-D
 * 20-bit layout the SEG-2 standard refers to, recalled from memory: the packing was NOT verified
 * against the standard's text, so format-3 amplitudes (nibble order, exponent sign) may need
 * correcting once checked against a recorder's file.
 *
 * @param bytes the whole file
 * @param fileName used in error messages
 * @throws FileFormatError (code "bad-file") naming the file and byte offset for any malformed or
 *   truncated file
 */
export function readSeg2(bytes: Uint8Array, fileName: string): Seg2File {
  const cur = new ByteCursor(fileName, bytes, true);
  cur.need(0, 32, "the SEG-2 file descriptor block");
  if (!isSeg2(bytes)) {
    const hex = `${bytes[0].toString(16).padStart(2, "0")} ${bytes[1].toString(16).padStart(2, "0")}`;
    cur.fail(0, `not a SEG-2 file: file descriptor block ID bytes are ${hex}`, "0x3a55 (bytes 55 3a or 3a 55)");
  }
  const byteOrder: ByteOrder = bytes[0] === 0x55 ? "little" : "big";
  cur.littleEndian = byteOrder === "little";
  const revision = cur.u16(2, "revision number");
  const pointerBytes = cur.u16(4, "trace pointer sub-block size");
  const traceCount = cur.u16(6, "number of traces");
  if (pointerBytes < 4 * traceCount) {
    cur.fail(4, `trace pointer sub-block size ${pointerBytes} is too small for ${traceCount} traces`, `at least ${4 * traceCount}`);
  }
  const stringTermSize = cur.u8(8, "string terminator size");
  if (stringTermSize > 2) cur.fail(8, `string terminator size ${stringTermSize}`, "1 or 2");
  const lineTermSize = cur.u8(11, "line terminator size");
  if (lineTermSize > 2) cur.fail(11, `line terminator size ${lineTermSize}`, "0, 1 or 2");
  const term: Terminators = {
    stringTerm: bytes.slice(9, 9 + stringTermSize),
    lineTerm: bytes.slice(12, 12 + lineTermSize),
  };
  const stringsStart = 32 + pointerBytes;
  cur.need(32, pointerBytes, "the trace pointer sub-block");

  const pointers: number[] = [];
  for (let i = 0; i < traceCount; i++) {
    const p = cur.u32(32 + 4 * i, `trace pointer ${i + 1}`);
    if (p < stringsStart) {
      cur.fail(32 + 4 * i, `trace pointer ${i + 1} points to byte ${p}, inside the file descriptor block`, `an offset of at least ${stringsStart}`);
    }
    cur.need(p, 32, `trace descriptor block ${i + 1}`);
    pointers.push(p);
  }
  const fileStringsEnd = pointers.length > 0 ? Math.min(...pointers) : bytes.length;
  const fileStrings = readStrings(cur, stringsStart, fileStringsEnd, term, "file descriptor");

  const traces: Seg2Trace[] = [];
  for (let i = 0; i < traceCount; i++) {
    const p = pointers[i];
    const id = cur.u16(p, `trace descriptor block ${i + 1} ID`);
    if (id !== SEG2_TRACE_ID) {
      cur.fail(p, `trace descriptor block ${i + 1} has ID 0x${id.toString(16).padStart(4, "0")}`, "0x4422");
    }
    const blockSize = cur.u16(p + 2, `trace descriptor block ${i + 1} size`);
    if (blockSize < 32) cur.fail(p + 2, `trace descriptor block ${i + 1} size ${blockSize}`, "at least 32 bytes");
    const dataSize = cur.u32(p + 4, `trace ${i + 1} data block size`);
    const sampleCount = cur.u32(p + 8, `trace ${i + 1} number of samples`);
    const format = cur.u8(p + 12, `trace ${i + 1} data format code`);
    if (format < 1 || format > 5) cur.fail(p + 12, `trace ${i + 1} data format code ${format}`, "1, 2, 3, 4 or 5");
    const formatCode = format as Seg2FormatCode;
    const needed = dataBytes(formatCode, sampleCount);
    if (needed > dataSize) {
      cur.fail(p + 4, `trace ${i + 1} data block size ${dataSize} is too small for ${sampleCount} samples of format ${format}`, `at least ${needed}`);
    }
    cur.need(p, blockSize, `trace descriptor block ${i + 1}`);
    const strings = readStrings(cur, p + 32, p + blockSize, term, `trace ${i + 1} descriptor`);
    const dataStart = p + blockSize;
    cur.need(dataStart, needed, `trace ${i + 1} data`);
    traces.push({ strings, sampleCount, formatCode, samples: decodeSamples(cur, dataStart, sampleCount, ENCODING[formatCode]), descriptorOffset: p, dataOffset: dataStart });
  }
  return { byteOrder, revision, fileStrings, traces };
}

/** A trace to write: its descriptor keywords and its samples. */
export interface Seg2WriteTrace {
  strings: Record<string, string>;
  samples: ArrayLike<number>;
}

export interface Seg2WriteOptions {
  /** Byte order of the file. @default "little" */
  byteOrder?: ByteOrder;
  /** Data format code of every trace. @default 4 (32-bit IEEE float) */
  formatCode?: Seg2FormatCode;
}

const encoder = new TextEncoder();

/** Encodes one string entry: count, "KEY value", NUL terminator, padded to an even length. */
function encodeStringEntry(key: string, value: string): Uint8Array {
  const text = encoder.encode(`${key} ${value}`);
  let len = 2 + text.length + 1;
  if (len % 2) len++;
  if (len > 0xffff) throw new RangeError(`writeSeg2: string for keyword ${key} is too long (${len} bytes)`);
  const out = new Uint8Array(len);
  out[0] = 0; // count written by the caller in the file's byte order
  out.set(text, 2);
  return out;
}

function stringBlock(strings: Record<string, string>, little: boolean): Uint8Array {
  const entries = Object.entries(strings).map(([k, v]) => {
    const e = encodeStringEntry(k.toUpperCase(), v.replace(/\r?\n/g, "\n"));
    new DataView(e.buffer).setUint16(0, e.length, little);
    return e;
  });
  const total = entries.reduce((s, e) => s + e.length, 0) + 2; // + zero count that ends the list
  const out = new Uint8Array(total);
  let off = 0;
  for (const e of entries) {
    out.set(e, off);
    off += e.length;
  }
  return out;
}

const pad4 = (n: number) => (n + 3) & ~3;

/**
 * Writes a SEG-2 file (revision 1). String terminator: one NUL byte; line terminator: one LF byte.
 * Every trace gets the given format code; keywords are written upper case in the order given.
 */
export function writeSeg2(
  file: { fileStrings: Record<string, string>; traces: Seg2WriteTrace[] },
  options: Seg2WriteOptions = {},
): Uint8Array {
  const byteOrder = options.byteOrder ?? "little";
  const format = options.formatCode ?? 4;
  if (byteOrder !== "little" && byteOrder !== "big") throw new TypeError(`writeSeg2: byteOrder must be "little" or "big", got ${String(byteOrder)}`);
  if (![1, 2, 3, 4, 5].includes(format)) throw new RangeError(`writeSeg2: formatCode must be 1 to 5, got ${format}`);
  const little = byteOrder === "little";
  const n = file.traces.length;
  if (n > 0xffff) throw new RangeError(`writeSeg2: at most 65535 traces, got ${n}`);

  const pointerBytes = 4 * n;
  const fileStrings = stringBlock(file.fileStrings, little);
  const traceBlocks = file.traces.map((t) => stringBlock(t.strings, little));
  let offset = pad4(32 + pointerBytes + fileStrings.length);
  const layout = file.traces.map((t, i) => {
    const blockSize = pad4(32 + traceBlocks[i].length);
    if (blockSize > 0xffff) throw new RangeError(`writeSeg2: trace ${i + 1} descriptor is too long (${blockSize} bytes)`);
    const dataSize = pad4(dataBytes(format, t.samples.length));
    const at = offset;
    offset += blockSize + dataSize;
    return { at, blockSize, dataSize };
  });
  const out = new Uint8Array(offset);
  const view = new DataView(out.buffer);
  view.setUint16(0, SEG2_FILE_ID, little);
  view.setUint16(2, 1, little);
  view.setUint16(4, pointerBytes, little);
  view.setUint16(6, n, little);
  out[8] = 1; // string terminator: one NUL
  out[9] = 0;
  out[11] = 1; // line terminator: LF
  out[12] = 0x0a;
  for (let i = 0; i < n; i++) view.setUint32(32 + 4 * i, layout[i].at, little);
  out.set(fileStrings, 32 + pointerBytes);
  file.traces.forEach((t, i) => {
    const { at, blockSize, dataSize } = layout[i];
    view.setUint16(at, SEG2_TRACE_ID, little);
    view.setUint16(at + 2, blockSize, little);
    view.setUint32(at + 4, dataSize, little);
    view.setUint32(at + 8, t.samples.length, little);
    out[at + 12] = format;
    out.set(traceBlocks[i], at + 32);
    const d = at + blockSize;
    const s = t.samples;
    switch (format) {
      case 1:
        for (let k = 0; k < s.length; k++) view.setInt16(d + 2 * k, clampInt(s[k], 32767), little);
        break;
      case 2:
        for (let k = 0; k < s.length; k++) view.setInt32(d + 4 * k, clampInt(s[k], 2147483647), little);
        break;
      case 3:
        encodeFormat3(s, view, d, little);
        break;
      case 4:
        for (let k = 0; k < s.length; k++) view.setFloat32(d + 4 * k, s[k], little);
        break;
      case 5:
        for (let k = 0; k < s.length; k++) view.setFloat64(d + 8 * k, s[k], little);
        break;
    }
  });
  return out;
}

function clampInt(v: number, max: number): number {
  const r = Math.round(v);
  return r > max ? max : r < -max - 1 ? -max - 1 : r;
}

/** Parses the numbers of a keyword value ("12.5", "-1 0 0"); empty when absent or not numeric. */
export function seg2Numbers(value: string | undefined): number[] {
  if (value === undefined) return [];
  const parts = value.trim().split(/[\s,]+/).filter(Boolean);
  const nums = parts.map(Number);
  return nums.every(Number.isFinite) ? nums : [];
}

export interface Seg2ToGatherOptions {
  /** Gather id, e.g. the file name without extension. */
  id: string;
  /** Field file name recorded in each trace header. */
  sourceFile: string;
  /** Recorded component. @default "z" */
  component?: Component;
  /** Multiply samples by the DESCALING_FACTOR keyword when present. @default true */
  applyDescaling?: boolean;
  /** Traces with NaN or infinite samples: "mark-dead" (zeroed, dead, warned) or "refuse" the file. @default "mark-dead" */
  nonFiniteSamples?: NonFiniteSamplePolicy;
  /** Receives one warning per trace marked dead for non-finite samples. */
  warnings?: NonFiniteTraceWarning[];
}

/**
 * Converts a read SEG-2 file to a {@link Gather}.
 *
 * - Sample interval from SAMPLE_INTERVAL (s), start time from DELAY (s) of the first trace.
 * - Positions from SOURCE_LOCATION / RECEIVER_LOCATION (first value x; third value, when present,
 *   an elevation, turned into a depth = −elevation); NaN when absent, for the geometry step to fill.
 * - Channel from CHANNEL_NUMBER (else the trace's position, 1-based); stack count from STACK (else 1).
 * - A trace whose samples are all exactly zero is marked dead; so is a trace holding NaN or
 *   infinite samples (zeroed, with a warning naming file, trace and count), unless
 *   `nonFiniteSamples` is "refuse".
 * - Source point and blow are 0 until the geometry step assigns them.
 *
 * @throws FileFormatError when a trace lacks SAMPLE_INTERVAL or traces differ in sample interval
 *   or sample count (a gather is rectangular), naming the trace's descriptor offset.
 */
export function seg2ToGather(file: Seg2File, fileName: string, options: Seg2ToGatherOptions): Gather {
  const component = options.component ?? "z";
  const applyDescaling = options.applyDescaling ?? true;
  const nonFinite = options.nonFiniteSamples ?? "mark-dead";
  const warnings = options.warnings ?? [];
  const cur = { fail: (at: number, message: string, expected?: string): never => { throw new FileFormatError(fileName, at, message, expected); } };
  if (file.traces.length === 0) cur.fail(6, "the file holds no traces", "at least one trace");
  const first = file.traces[0];
  const dt = seg2Numbers(first.strings.SAMPLE_INTERVAL)[0];
  if (!(dt > 0)) cur.fail(first.descriptorOffset, `trace 1 has no valid SAMPLE_INTERVAL keyword (got "${first.strings.SAMPLE_INTERVAL ?? ""}")`, "a positive sample interval in seconds");
  const ns = first.sampleCount;
  const delay = seg2Numbers(first.strings.DELAY)[0] ?? 0;
  const data = new Float32Array(file.traces.length * ns);
  const traces: TraceHeader[] = file.traces.map((t, i) => {
    const tdt = seg2Numbers(t.strings.SAMPLE_INTERVAL)[0];
    if (tdt === undefined || Math.abs(tdt - dt) > 1e-9 * dt) {
      cur.fail(t.descriptorOffset, `trace ${i + 1} SAMPLE_INTERVAL "${t.strings.SAMPLE_INTERVAL ?? ""}" differs from trace 1 (${dt})`, `${dt} s`);
    }
    if (t.sampleCount !== ns) cur.fail(t.descriptorOffset + 8, `trace ${i + 1} has ${t.sampleCount} samples, trace 1 has ${ns}`, `${ns} samples`);
    const scale = applyDescaling ? (seg2Numbers(t.strings.DESCALING_FACTOR)[0] ?? 1) : 1;
    const row = i * ns;
    for (let k = 0; k < ns; k++) data[row + k] = t.samples[k] * scale;
    const channelNumber = seg2Numbers(t.strings.CHANNEL_NUMBER)[0];
    const bad = screenNonFinite(
      data.subarray(row, row + ns),
      { file: fileName, trace: i + 1, channel: Number.isInteger(channelNumber) ? channelNumber : i + 1, headerOffset: t.descriptorOffset, sampleOffset: t.dataOffset, sampleBytes: t.formatCode === 3 ? 0 : dataBytes(t.formatCode, 1) },
      nonFinite,
      warnings,
    );
    let allZero = true;
    for (let k = 0; k < ns; k++) {
      if (data[row + k] !== 0) {
        allZero = false;
        break;
      }
    }
    const src = seg2Numbers(t.strings.SOURCE_LOCATION);
    const rec = seg2Numbers(t.strings.RECEIVER_LOCATION);
    const sourceX = src.length > 0 ? src[0] : NaN;
    const receiverX = rec.length > 0 ? rec[0] : NaN;
    const channel = seg2Numbers(t.strings.CHANNEL_NUMBER)[0];
    const stack = seg2Numbers(t.strings.STACK)[0];
    return {
      sourceFile: fileName,
      channel: Number.isInteger(channel) ? channel : i + 1,
      sourcePoint: 0,
      blow: 0,
      sourceX,
      sourceZ: src.length >= 3 ? -src[2] : 0,
      receiverX,
      receiverZ: rec.length >= 3 ? -rec[2] : 0,
      offset: receiverX - sourceX,
      stackCount: stack !== undefined && stack >= 1 ? stack : 1,
      component,
      dead: allZero || bad,
    };
  });
  return { id: options.id, sampleIntervalS: dt, sampleCount: ns, startTimeS: delay, traces, data };
}

/** Formats a number for a keyword value: shortest text that reads back to the same double. */
const num = (v: number) => String(v);

/**
 * Builds the SEG-2 keywords of one trace from our trace header (SAMPLE_INTERVAL, DELAY,
 * CHANNEL_NUMBER, SOURCE_LOCATION, RECEIVER_LOCATION, STACK). Positions with a non-zero depth are
 * written as "x 0 elevation" with elevation = −depth.
 */
export function seg2TraceStrings(g: Pick<Gather, "sampleIntervalS" | "startTimeS">, h: TraceHeader): Record<string, string> {
  const loc = (x: number, z: number) => (z === 0 ? num(x) : `${num(x)} 0 ${num(-z)}`);
  const s: Record<string, string> = {
    CHANNEL_NUMBER: String(h.channel),
    SAMPLE_INTERVAL: num(g.sampleIntervalS),
    DELAY: num(g.startTimeS),
    STACK: String(h.stackCount),
  };
  if (Number.isFinite(h.sourceX)) s.SOURCE_LOCATION = loc(h.sourceX, h.sourceZ);
  if (Number.isFinite(h.receiverX)) s.RECEIVER_LOCATION = loc(h.receiverX, h.receiverZ);
  return s;
}

/** Writes one gather as a SEG-2 file (format 4 unless told otherwise). */
export function writeGatherAsSeg2(gather: Gather, fileStrings: Record<string, string> = {}, options: Seg2WriteOptions = {}): Uint8Array {
  const ns = gather.sampleCount;
  return writeSeg2(
    {
      fileStrings: { UNITS: "METERS", ...fileStrings },
      traces: gather.traces.map((h, i) => ({ strings: seg2TraceStrings(gather, h), samples: gather.data.subarray(i * ns, (i + 1) * ns) })),
    },
    options,
  );
}
