/**
 * A minimal PNG encoder for server-drawn rasters (the model sections of the report): 8-bit RGB,
 * no interlace, filter type 0 on every row, one zlib-compressed IDAT chunk. Layout and CRC-32
 * from the PNG specification (W3C, Portable Network Graphics, 2nd ed., 2003, sections 5 and 11,
 * and annex D for the CRC).
 */
import zlib from "node:zlib";

const CRC_TABLE = (() => {
  const t = new Uint32Array(256);
  for (let n = 0; n < 256; n++) {
    let c = n;
    for (let k = 0; k < 8; k++) c = c & 1 ? 0xedb88320 ^ (c >>> 1) : c >>> 1;
    t[n] = c >>> 0;
  }
  return t;
})();

/** CRC-32 as PNG computes it (polynomial 0xEDB88320, initial and final XOR 0xFFFFFFFF). */
export function crc32(bytes: Uint8Array, start = 0, end = bytes.length): number {
  let c = 0xffffffff;
  for (let i = start; i < end; i++) c = CRC_TABLE[(c ^ bytes[i]) & 0xff] ^ (c >>> 8);
  return (c ^ 0xffffffff) >>> 0;
}

function chunk(type: string, data: Uint8Array): Uint8Array {
  const out = new Uint8Array(12 + data.length);
  const view = new DataView(out.buffer);
  view.setUint32(0, data.length);
  for (let i = 0; i < 4; i++) out[4 + i] = type.charCodeAt(i);
  out.set(data, 8);
  view.setUint32(8 + data.length, crc32(out, 4, 8 + data.length));
  return out;
}

/**
 * Encodes an RGB raster, flat row-major `[row][column][r, g, b]` (length width * height * 3),
 * as PNG bytes.
 */
export function encodePngRgb(width: number, height: number, rgb: Uint8Array): Uint8Array {
  if (!Number.isInteger(width) || width < 1) throw new RangeError(`width must be a positive integer, got ${width}`);
  if (!Number.isInteger(height) || height < 1) throw new RangeError(`height must be a positive integer, got ${height}`);
  if (rgb.length !== width * height * 3) throw new RangeError(`rgb must hold width * height * 3 = ${width * height * 3} bytes, got ${rgb.length}`);
  const header = new Uint8Array(13);
  const hv = new DataView(header.buffer);
  hv.setUint32(0, width);
  hv.setUint32(4, height);
  header[8] = 8; // bit depth
  header[9] = 2; // colour type: truecolour
  // compression 0, filter 0, interlace 0
  const raw = new Uint8Array(height * (1 + width * 3));
  for (let y = 0; y < height; y++) {
    raw[y * (1 + width * 3)] = 0;
    raw.set(rgb.subarray(y * width * 3, (y + 1) * width * 3), y * (1 + width * 3) + 1);
  }
  const idat = new Uint8Array(zlib.deflateSync(raw));
  const signature = Uint8Array.from([137, 80, 78, 71, 13, 10, 26, 10]);
  const parts = [signature, chunk("IHDR", header), chunk("IDAT", idat), chunk("IEND", new Uint8Array(0))];
  const out = new Uint8Array(parts.reduce((n, p) => n + p.length, 0));
  let at = 0;
  for (const p of parts) {
    out.set(p, at);
    at += p.length;
  }
  return out;
}
