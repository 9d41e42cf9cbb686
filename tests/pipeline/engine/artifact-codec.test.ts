/** Artifact encoding: round trips and stable bytes (our own format; see artifact-codec.ts). */
import { describe, expect, it } from "vitest";
import { canonicalJson, decodeArtifact, encodeArtifact } from "../../../pipeline/artifact-codec";

describe("artifact codec", () => {
  it("round-trips nested data with typed arrays of every kind, NaN and infinities", () => {
    const value = {
      kind: "gathers",
      b: [1, "two", true, null, { nested: new Float64Array([1.5, -2.25]) }],
      a: new Float32Array([0.1, -3, 7]),
      ints: new Int32Array([-1, 2 ** 30]),
      bytes: new Uint8Array([1, 2, 3]),
      odd: new Int16Array([5]),
      nan: NaN,
      inf: -Infinity,
    };
    const back = decodeArtifact(encodeArtifact(value)) as typeof value;
    expect(back.a).toBeInstanceOf(Float32Array);
    expect(Array.from(back.a)).toEqual(Array.from(value.a));
    expect(Array.from((back.b[4] as { nested: Float64Array }).nested)).toEqual([1.5, -2.25]);
    expect(Array.from(back.ints)).toEqual([-1, 2 ** 30]);
    expect(Array.from(back.bytes)).toEqual([1, 2, 3]);
    expect(Array.from(back.odd)).toEqual([5]);
    expect(back.nan).toBeNaN();
    expect(back.inf).toBe(-Infinity);
    expect(back.b.slice(0, 4)).toEqual([1, "two", true, null]);
  });

  it("encodes equal values to equal bytes whatever the key order", () => {
    const x = encodeArtifact({ a: 1, b: new Float32Array([1, 2]) });
    const y = encodeArtifact({ b: new Float32Array([1, 2]), a: 1 });
    expect(Buffer.from(x).equals(Buffer.from(y))).toBe(true);
    expect(canonicalJson({ b: 1, a: { d: 2, c: 3 } })).toBe('{"a":{"c":3,"d":2},"b":1}');
  });

  it("handles typed-array views at odd offsets into larger buffers", () => {
    const big = new Float32Array(10).map((_, i) => i);
    const view = big.subarray(3, 6);
    const back = decodeArtifact(encodeArtifact({ v: view })) as { v: Float32Array };
    expect(Array.from(back.v)).toEqual([3, 4, 5]);
  });

  it("rejects what is not plain data and what is not an artifact", () => {
    expect(() => encodeArtifact({ when: new Date() })).toThrow(/when is not plain data/);
    expect(() => decodeArtifact(new Uint8Array([1, 2, 3, 4, 5, 6, 7, 8, 9]))).toThrow(/bad magic/);
    const good = encodeArtifact({ a: new Float32Array(100) });
    expect(() => decodeArtifact(good.subarray(0, good.length - 50))).toThrow(/truncated/);
  });
});
