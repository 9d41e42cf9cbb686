/**
 * Binary encoding of slot values (see types.ts): a small header, a JSON description with
 * typed arrays replaced by references, then the arrays' bytes, each aligned to 8 bytes.
 *
 * Layout (little-endian):
 *   bytes 0-3   magic "TWA1"
 *   bytes 4-7   u32 length J of the JSON text
 *   bytes 8..   JSON text (UTF-8), then zero padding to a multiple of 8
 *   then        each array's bytes in order, each padded to a multiple of 8
 * In the JSON a typed array is {"$array": "f32"|"f64"|"i32"|"u8"|..., "index": k, "length": n}.
 *
 * The same value always encodes to the same bytes (object keys sorted), so the content hash
 * of the encoding identifies the value.
 */

const MAGIC = 0x31415754; // "TWA1" read as little-endian u32

type ArrayTag = "f32" | "f64" | "i32" | "u32" | "i16" | "u16" | "i8" | "u8";
type AnyTypedArray =
  | Float32Array
  | Float64Array
  | Int32Array
  | Uint32Array
  | Int16Array
  | Uint16Array
  | Int8Array
  | Uint8Array;

const CTORS: Record<ArrayTag, { new (buf: ArrayBuffer, offset: number, length: number): AnyTypedArray; BYTES_PER_ELEMENT: number }> = {
  f32: Float32Array,
  f64: Float64Array,
  i32: Int32Array,
  u32: Uint32Array,
  i16: Int16Array,
  u16: Uint16Array,
  i8: Int8Array,
  u8: Uint8Array,
};

function tagOf(v: unknown): ArrayTag | null {
  if (v instanceof Float32Array) return "f32";
  if (v instanceof Float64Array) return "f64";
  if (v instanceof Int32Array) return "i32";
  if (v instanceof Uint32Array) return "u32";
  if (v instanceof Int16Array) return "i16";
  if (v instanceof Uint16Array) return "u16";
  if (v instanceof Int8Array) return "i8";
  if (v instanceof Uint8Array) return "u8";
  return null;
}

const pad8 = (n: number) => (n + 7) & ~7;

/** Encodes a slot value to bytes. Throws TypeError on values that are not plain data. */
export function encodeArtifact(value: unknown): Uint8Array {
  const arrays: AnyTypedArray[] = [];
  const describe = (v: unknown, path: string): unknown => {
    if (v === null || typeof v === "string" || typeof v === "boolean") return v;
    if (typeof v === "number") {
      // JSON has no NaN/Infinity: keep them as tagged strings.
      if (Number.isFinite(v)) return v;
      return { $number: String(v) };
    }
    if (v === undefined) return undefined;
    const tag = tagOf(v);
    if (tag) {
      arrays.push(v as AnyTypedArray);
      return { $array: tag, index: arrays.length - 1, length: (v as AnyTypedArray).length };
    }
    if (Array.isArray(v)) return v.map((x, i) => describe(x, `${path}[${i}]`) ?? null);
    if (typeof v === "object" && Object.getPrototypeOf(v) === Object.prototype) {
      const out: Record<string, unknown> = {};
      for (const key of Object.keys(v as object).sort()) {
        const d = describe((v as Record<string, unknown>)[key], `${path}.${key}`);
        if (d !== undefined) out[key] = d;
      }
      return out;
    }
    throw new TypeError(`encodeArtifact: ${path || "value"} is not plain data (${Object.prototype.toString.call(v)})`);
  };
  const json = new TextEncoder().encode(JSON.stringify(describe(value, "")));
  let total = 8 + pad8(json.length);
  for (const a of arrays) total += pad8(a.byteLength);
  const out = new Uint8Array(total);
  const view = new DataView(out.buffer);
  view.setUint32(0, MAGIC, true);
  view.setUint32(4, json.length, true);
  out.set(json, 8);
  let offset = 8 + pad8(json.length);
  for (const a of arrays) {
    out.set(new Uint8Array(a.buffer, a.byteOffset, a.byteLength), offset);
    offset += pad8(a.byteLength);
  }
  return out;
}

/** Decodes bytes made by {@link encodeArtifact}. Typed arrays are fresh copies (safe to transfer). */
export function decodeArtifact(bytes: Uint8Array, label = "artifact"): unknown {
  if (bytes.length < 8) throw new RangeError(`${label}: ${bytes.length} bytes is too short for an artifact header`);
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  if (view.getUint32(0, true) !== MAGIC) throw new RangeError(`${label}: not a Tracewright artifact (bad magic)`);
  const jsonLength = view.getUint32(4, true);
  if (8 + jsonLength > bytes.length) throw new RangeError(`${label}: truncated header`);
  const json = JSON.parse(new TextDecoder().decode(bytes.subarray(8, 8 + jsonLength)));
  // First pass: collect array descriptors to know their offsets.
  const descs: Array<{ tag: ArrayTag; length: number }> = [];
  const collect = (v: unknown): void => {
    if (v && typeof v === "object") {
      if ("$array" in (v as object)) {
        const d = v as { $array: ArrayTag; index: number; length: number };
        descs[d.index] = { tag: d.$array, length: d.length };
        return;
      }
      for (const x of Object.values(v as object)) collect(x);
    }
  };
  collect(json);
  const offsets: number[] = [];
  let offset = 8 + pad8(jsonLength);
  for (const d of descs) {
    offsets.push(offset);
    offset += pad8(d.length * CTORS[d.tag].BYTES_PER_ELEMENT);
  }
  if (offset > bytes.length) throw new RangeError(`${label}: truncated array data`);
  const rebuild = (v: unknown): unknown => {
    if (v === null || typeof v !== "object") return v;
    if (Array.isArray(v)) return v.map(rebuild);
    const o = v as Record<string, unknown>;
    if ("$number" in o) return Number(o.$number);
    if ("$array" in o) {
      const d = o as unknown as { $array: ArrayTag; index: number; length: number };
      const ctor = CTORS[d.$array];
      const byteLength = d.length * ctor.BYTES_PER_ELEMENT;
      const copy = new ArrayBuffer(byteLength);
      new Uint8Array(copy).set(bytes.subarray(offsets[d.index], offsets[d.index] + byteLength));
      return new ctor(copy, 0, d.length);
    }
    const out: Record<string, unknown> = {};
    for (const [k, x] of Object.entries(o)) out[k] = rebuild(x);
    return out;
  };
  return rebuild(json);
}

/** Canonical JSON: sorted keys, no whitespace. Used for parameters in cache keys. */
export function canonicalJson(value: unknown): string {
  const norm = (v: unknown): unknown => {
    if (Array.isArray(v)) return v.map(norm);
    if (v && typeof v === "object") {
      const out: Record<string, unknown> = {};
      for (const k of Object.keys(v as object).sort()) {
        const x = (v as Record<string, unknown>)[k];
        if (x !== undefined) out[k] = norm(x);
      }
      return out;
    }
    return v;
  };
  return JSON.stringify(norm(value));
}
