import { describe, expect, it } from "vitest";
import { decodeEbcdic, encodeEbcdic, looksLikeEbcdic } from "../../../pipeline/io/ebcdic";

describe("EBCDIC code page 037", () => {
  it("maps the code points of the IBM code page 037 chart", () => {
    // IBM code page 037 chart: space 0x40, "C" 0xC3, "1" 0xF1, "a" 0x81, "Z" 0xE9, "." 0x4B,
    // "=" 0x7E, "0" 0xF0, "9" 0xF9 (also what Python's cp037 codec gives).
    const pairs: Array<[number, string]> = [
      [0x40, " "],
      [0xc3, "C"],
      [0xf1, "1"],
      [0x81, "a"],
      [0xe9, "Z"],
      [0x4b, "."],
      [0x7e, "="],
      [0xf0, "0"],
      [0xf9, "9"],
    ];
    for (const [byte, ch] of pairs) {
      expect(decodeEbcdic(new Uint8Array([byte]))).toBe(ch);
      expect(Array.from(encodeEbcdic(ch))).toEqual([byte]);
    }
  });

  it("round-trips every byte", () => {
    const all = new Uint8Array(256).map((_, i) => i);
    expect(Array.from(encodeEbcdic(decodeEbcdic(all)))).toEqual(Array.from(all));
  });

  it("tells EBCDIC from ASCII text headers", () => {
    const text = "C 1 CLIENT QUILLMOOR LINE QM-1".padEnd(80, " ");
    expect(looksLikeEbcdic(encodeEbcdic(text))).toBe(true);
    expect(looksLikeEbcdic(new TextEncoder().encode(text))).toBe(false);
  });
});
