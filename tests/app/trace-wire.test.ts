/**
 * The binary trace answer and the peak-keeping decimation used for overviews. Expected values
 * are worked by hand from the definitions in app/lib/trace-wire.ts (our own format).
 */
import { describe, expect, it } from "vitest";
import { decimatePeaks, decodeWire, encodeWire } from "@/app/lib/trace-wire";
import { mulberry32 } from "../helpers/random";

describe("trace wire format", () => {
  it("round-trips a header and float32 payload bit for bit, whatever the header length", () => {
    const rand = mulberry32(7);
    for (const pad of ["", "a", "ab", "abc"]) {
      const data = Float32Array.from({ length: 37 }, () => rand() * 2 - 1);
      const bytes = encodeWire({ note: pad }, [data]);
      const copy = bytes.slice().buffer;
      const { header, payload } = decodeWire<{ note: string }>(copy);
      expect(header.note).toBe(pad);
      expect(Array.from(payload)).toEqual(Array.from(data));
    }
  });

  it("refuses a buffer without the magic, naming the byte", () => {
    expect(() => decodeWire(new ArrayBuffer(16))).toThrow(/byte 0/);
  });
});

describe("decimatePeaks", () => {
  it("keeps the sample of largest magnitude in each window, sign included", () => {
    // Two traces of 7 samples, factor 3 → windows [0..2], [3..5], [6].
    const data = Float32Array.from([1, -4, 2, 0.5, 0.2, -0.1, 9, 0, 0, 3, -3.5, 1, 1, -2]);
    const out = new Float32Array(2 * 3);
    decimatePeaks(data, 2, 7, 3, out);
    expect(Array.from(out)).toEqual([-4, 0.5, 9, 3, -3.5, -2]);
  });

  it("rejects a bad factor or output length with the parameter named", () => {
    expect(() => decimatePeaks(new Float32Array(4), 1, 4, 0, new Float32Array(4))).toThrow(/factor/);
    expect(() => decimatePeaks(new Float32Array(4), 1, 4, 2, new Float32Array(3))).toThrow(/out/);
  });
});
