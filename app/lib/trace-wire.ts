/**
 * The compact binary answer of the trace and model routes, shared by server and browser.
 *
 * Layout (little-endian):
 *   bytes 0-3   magic "TWT1"
 *   bytes 4-7   u32 length J of the JSON header (UTF-8)
 *   bytes 8..   JSON header, zero padding to a multiple of 4
 *   then        float32 payload (for gathers: flat `[trace][sample]`; for models: the named
 *               fields one after the other, each flat `[z][x]`)
 */

const MAGIC = 0x31545754; // "TWT1" read as little-endian u32

/** Packs a JSON header and float32 arrays into one buffer. */
export function encodeWire(header: unknown, arrays: Float32Array[]): Uint8Array {
  const json = new TextEncoder().encode(JSON.stringify(header));
  const headerEnd = (8 + json.length + 3) & ~3;
  const floats = arrays.reduce((n, a) => n + a.length, 0);
  const out = new Uint8Array(headerEnd + floats * 4);
  const view = new DataView(out.buffer);
  view.setUint32(0, MAGIC, true);
  view.setUint32(4, json.length, true);
  out.set(json, 8);
  let at = headerEnd;
  for (const a of arrays) {
    out.set(new Uint8Array(a.buffer, a.byteOffset, a.byteLength), at);
    at += a.byteLength;
  }
  return out;
}

/** Unpacks a buffer made by {@link encodeWire}; the payload is a view on `buffer` (no copy). */
export function decodeWire<H>(buffer: ArrayBuffer): { header: H; payload: Float32Array } {
  if (buffer.byteLength < 8) throw new RangeError(`trace answer: ${buffer.byteLength} bytes, expected at least 8`);
  const view = new DataView(buffer);
  if (view.getUint32(0, true) !== MAGIC) throw new RangeError("trace answer: bad magic at byte 0, expected TWT1");
  const jsonLength = view.getUint32(4, true);
  if (8 + jsonLength > buffer.byteLength) throw new RangeError(`trace answer: header length ${jsonLength} runs past the end`);
  const header = JSON.parse(new TextDecoder().decode(new Uint8Array(buffer, 8, jsonLength))) as H;
  const headerEnd = (8 + jsonLength + 3) & ~3;
  const payload = new Float32Array(buffer, headerEnd, (buffer.byteLength - headerEnd) >> 2);
  return { header, payload };
}

/**
 * Peak-preserving decimation in time for overview display: each output sample is the input
 * sample of largest magnitude in its window of `factor` samples, so first breaks and peaks
 * stay visible (plain subsampling could skip them). Writes into `out` (length
 * traces * ceil(samples / factor)).
 */
export function decimatePeaks(data: Float32Array, traces: number, samples: number, factor: number, out: Float32Array): void {
  if (!Number.isInteger(factor) || factor < 1) throw new RangeError(`factor must be a positive integer, got ${factor}`);
  const outSamples = Math.ceil(samples / factor);
  if (out.length !== traces * outSamples) throw new RangeError(`out has length ${out.length}, expected ${traces * outSamples}`);
  for (let t = 0; t < traces; t++) {
    const inBase = t * samples;
    const outBase = t * outSamples;
    for (let j = 0; j < outSamples; j++) {
      const start = j * factor;
      const end = Math.min(start + factor, samples);
      let best = data[inBase + start];
      for (let i = start + 1; i < end; i++) {
        const v = data[inBase + i];
        if (Math.abs(v) > Math.abs(best)) best = v;
      }
      out[outBase + j] = best;
    }
  }
}
