/**
 * SEG-2 reader and writer against the byte positions of the SEG-2 standard (Pullan, S. E.
 * (chair), 1990, "Recommended standard for seismic (/radar) data files in the personal computer
 * environment", Geophysics 55(9), 1260–1271): files are built here by hand with a DataView at the
 * documented positions, independently of the writer.
 */
import { describe, expect, it } from "vitest";
import { FileFormatError } from "../../../pipeline/errors";
import { readSeg2, seg2ToGather, writeGatherAsSeg2, writeSeg2, type Seg2FormatCode } from "../../../pipeline/io/seg2";
import { seededRandom } from "../../helpers/random";
import { catchError as catchFileError } from "../../helpers/catch-error";

interface HandTrace {
  strings: string[];
  sampleCount: number;
  format: number;
  /** Writes the data block; returns its size in bytes. */
  data: (view: DataView, at: number, little: boolean) => number;
}

/**
 * Lays out a SEG-2 file by the standard: file descriptor block (ID, revision, pointer sub-block
 * size M, trace count N, string and line terminators at bytes 8–13), pointers from byte 32, file
 * strings from 32+M; each trace descriptor block (ID 0x4422, block size X, data size Y, samples,
 * format code at byte 12, strings from byte 32) followed by its data block at X.
 */
function handBuild(opts: {
  little: boolean;
  fileStrings: string[];
  traces: HandTrace[];
  stringTerm?: number[];
  lineTerm?: number[];
}): { bytes: Uint8Array; pointers: number[]; dataStarts: number[] } {
  const { little } = opts;
  const st = opts.stringTerm ?? [0];
  const lt = opts.lineTerm ?? [];
  const buf = new Uint8Array(8192);
  const v = new DataView(buf.buffer);
  const n = opts.traces.length;
  const m = 4 * n + 4; // a sub-block larger than needed is allowed (M ≥ 4N)
  v.setUint16(0, 0x3a55, little);
  v.setUint16(2, 1, little);
  v.setUint16(4, m, little);
  v.setUint16(6, n, little);
  v.setUint8(8, st.length);
  st.forEach((c, i) => v.setUint8(9 + i, c));
  v.setUint8(11, lt.length);
  lt.forEach((c, i) => v.setUint8(12 + i, c));
  const putStrings = (at: number, strings: string[]): number => {
    let off = at;
    for (const s of strings) {
      const text = Array.from(s, (c) => c.charCodeAt(0));
      const len = 2 + text.length + st.length;
      v.setUint16(off, len, little);
      text.forEach((c, i) => v.setUint8(off + 2 + i, c));
      st.forEach((c, i) => v.setUint8(off + 2 + text.length + i, c));
      off += len;
    }
    v.setUint16(off, 0, little);
    return off + 2;
  };
  let off = putStrings(32 + m, opts.fileStrings);
  off = (off + 3) & ~3;
  const pointers: number[] = [];
  const dataStarts: number[] = [];
  opts.traces.forEach((t, i) => {
    const p = off;
    pointers.push(p);
    v.setUint32(32 + 4 * i, p, little);
    v.setUint16(p, 0x4422, little);
    const end = putStrings(p + 32, t.strings);
    const x = (end - p + 3) & ~3;
    v.setUint16(p + 2, x, little);
    v.setUint32(p + 8, t.sampleCount, little);
    v.setUint8(p + 12, t.format);
    dataStarts.push(p + x);
    const y = t.data(v, p + x, little);
    v.setUint32(p + 4, y, little);
    off = p + x + y;
  });
  return { bytes: buf.slice(0, off), pointers, dataStarts };
}

const traceStrings = (ch: number, rx: number) => [
  `CHANNEL_NUMBER ${ch}`,
  "SAMPLE_INTERVAL 0.00025",
  "DELAY -0.01",
  "SOURCE_LOCATION -1.0",
  `RECEIVER_LOCATION ${rx}`,
  "STACK 1",
];

describe("readSeg2 on hand-built files", () => {
  for (const little of [true, false]) {
    it(`reads header fields, strings and int16 samples (${little ? "little" : "big"}-endian)`, () => {
      const { bytes, pointers } = handBuild({
        little,
        lineTerm: [0x0a],
        fileStrings: ["COMPANY Corvell Ground Imaging", "NOTE first line\nsecond line", "UNITS METERS"],
        traces: [
          {
            strings: traceStrings(1, 0),
            sampleCount: 4,
            format: 1,
            data: (dv, at, le) => {
              [1, -2, 32767, -32768].forEach((s, k) => dv.setInt16(at + 2 * k, s, le));
              return 8;
            },
          },
          {
            strings: traceStrings(2, 1.5),
            sampleCount: 4,
            format: 1,
            data: (dv, at, le) => {
              [0, 0, 0, 0].forEach((s, k) => dv.setInt16(at + 2 * k, s, le));
              return 8;
            },
          },
        ],
      });
      // Standard: the ID reads 0x3a55 in the file's own byte order, so the first two bytes show it.
      expect(Array.from(bytes.slice(0, 2))).toEqual(little ? [0x55, 0x3a] : [0x3a, 0x55]);
      const f = readSeg2(bytes, "hand.sg2");
      expect(f.byteOrder).toBe(little ? "little" : "big");
      expect(f.revision).toBe(1);
      expect(f.fileStrings.COMPANY).toBe("Corvell Ground Imaging");
      expect(f.fileStrings.NOTE).toBe("first line\nsecond line");
      expect(f.traces).toHaveLength(2);
      expect(f.traces[0].descriptorOffset).toBe(pointers[0]);
      expect(f.traces[1].descriptorOffset).toBe(pointers[1]);
      expect(f.traces[0].formatCode).toBe(1);
      expect(f.traces[0].sampleCount).toBe(4);
      expect(Array.from(f.traces[0].samples)).toEqual([1, -2, 32767, -32768]);
      expect(f.traces[1].strings.RECEIVER_LOCATION).toBe("1.5");
      expect(f.traces[0].strings.DELAY).toBe("-0.01");
    });
  }

  it("reads data formats 2 (int32), 4 (float32) and 5 (float64) at their byte widths", () => {
    const values = [-2147483648, 123456, 0.25, -1e-3];
    const cases: Array<{ format: number; width: number; put: (dv: DataView, at: number, x: number, le: boolean) => void; expected: number[] }> = [
      { format: 2, width: 4, put: (dv, at, x, le) => dv.setInt32(at, Math.trunc(x), le), expected: [-2147483648, 123456, 0, -0] },
      { format: 4, width: 4, put: (dv, at, x, le) => dv.setFloat32(at, x, le), expected: values.map(Math.fround) },
      { format: 5, width: 8, put: (dv, at, x, le) => dv.setFloat64(at, x, le), expected: values.map(Math.fround) },
    ];
    for (const little of [true, false]) {
      for (const c of cases) {
        const { bytes } = handBuild({
          little,
          fileStrings: [],
          traces: [
            {
              strings: traceStrings(1, 0),
              sampleCount: 4,
              format: c.format,
              data: (dv, at, le) => {
                values.forEach((x, k) => c.put(dv, at + c.width * k, x, le));
                return 4 * c.width;
              },
            },
          ],
        });
        const f = readSeg2(bytes, "f.sg2");
        expect(f.traces[0].formatCode).toBe(c.format);
        expect(Array.from(f.traces[0].samples).map((x) => x + 0)).toEqual(c.expected.map((x) => x + 0));
      }
    }
  });

  it("reads format 3 (20-bit packed float) as 4 samples in 10 bytes", () => {
    // Layout as implemented (SEG-D 20-bit style, from memory; NOT verified against the SEG-2 text):
    // one 16-bit word of four 4-bit exponents, first sample in the top nibble, then four int16
    // mantissas; value = mantissa · 2^exponent. Exponent word 0x0123 → exponents 0, 1, 2, 3.
    for (const little of [true, false]) {
      const { bytes } = handBuild({
        little,
        fileStrings: [],
        traces: [
          {
            strings: traceStrings(1, 0),
            sampleCount: 6,
            format: 3,
            data: (dv, at, le) => {
              dv.setUint16(at, 0x0123, le);
              [100, -100, 1000, -5].forEach((m, k) => dv.setInt16(at + 2 + 2 * k, m, le));
              dv.setUint16(at + 10, 0xf000, le);
              [1, 7, 0, 0].forEach((m, k) => dv.setInt16(at + 12 + 2 * k, m, le));
              return 20;
            },
          },
        ],
      });
      const f = readSeg2(bytes, "f3.sg2");
      expect(Array.from(f.traces[0].samples)).toEqual([100, -200, 4000, -40, 32768, 7]);
    }
  });

  it("cuts strings at a two-byte string terminator and splits lines at the line terminator", () => {
    // Standard: terminator sizes and characters at bytes 8–10 (string) and 11–13 (line).
    const { bytes } = handBuild({
      little: true,
      stringTerm: [0x3b, 0x3b], // ";;"
      lineTerm: [0x0d, 0x0a], // CR LF
      fileStrings: ["NOTE one\r\ntwo", "CLIENT Quillmoor"],
      traces: [{ strings: traceStrings(1, 0), sampleCount: 1, format: 4, data: (dv, at, le) => (dv.setFloat32(at, 2, le), 4) }],
    });
    const f = readSeg2(bytes, "t.sg2");
    expect(f.fileStrings.NOTE).toBe("one\ntwo");
    expect(f.fileStrings.CLIENT).toBe("Quillmoor");
  });
});

describe("writeSeg2 → readSeg2 round trips", () => {
  const rnd = seededRandom(7);
  for (const byteOrder of ["little", "big"] as const) {
    for (const formatCode of [1, 2, 3, 4, 5] as Seg2FormatCode[]) {
      it(`format ${formatCode}, ${byteOrder}-endian`, () => {
        const ns = 37; // not a multiple of 4, to exercise the last format-3 group
        const traces = [0, 1, 2].map((i) => {
          const s = new Float32Array(ns);
          for (let k = 0; k < ns; k++) {
            const x = rnd.gaussian() * 1000;
            // Integer formats hold integers; format 3 holds mantissa · 2^e with |mantissa| < 2^15.
            s[k] = formatCode === 1 || formatCode === 2 || formatCode === 3 ? Math.round(x) + 0 : x;
          }
          return { strings: { CHANNEL_NUMBER: String(i + 1), SAMPLE_INTERVAL: "0.00025" }, samples: s };
        });
        const bytes = writeSeg2({ fileStrings: { COMPANY: "Corvell Ground Imaging" }, traces }, { byteOrder, formatCode });
        expect(bytes[0]).toBe(byteOrder === "little" ? 0x55 : 0x3a);
        const f = readSeg2(bytes, "rt.sg2");
        expect(f.byteOrder).toBe(byteOrder);
        expect(f.fileStrings.COMPANY).toBe("Corvell Ground Imaging");
        f.traces.forEach((t, i) => {
          expect(t.formatCode).toBe(formatCode);
          expect(t.strings.CHANNEL_NUMBER).toBe(String(i + 1));
          // All written values are exactly representable in each format (|x| < 2^15 integers for
          // formats 1–3, float32 values for 4 and 5), so the round trip is exact.
          expect(Array.from(t.samples)).toEqual(Array.from(traces[i].samples));
        });
      });
    }
  }
});

describe("seg2ToGather", () => {
  it("takes interval, delay, positions, stack and dead traces from the keywords", () => {
    const { bytes } = handBuild({
      little: true,
      fileStrings: [],
      traces: [
        {
          strings: ["CHANNEL_NUMBER 5", "SAMPLE_INTERVAL 0.00025", "DELAY -0.01", "SOURCE_LOCATION -1.25 0 0", "RECEIVER_LOCATION 4.5", "STACK 3", "DESCALING_FACTOR 0.5"],
          sampleCount: 2,
          format: 1,
          data: (dv, at, le) => (dv.setInt16(at, 10, le), dv.setInt16(at + 2, -4, le), 4),
        },
        {
          strings: ["SAMPLE_INTERVAL 0.00025", "DELAY -0.01"],
          sampleCount: 2,
          format: 1,
          data: () => 4,
        },
      ],
    });
    const g = seg2ToGather(readSeg2(bytes, "sp01-b1.sg2"), "sp01-b1.sg2", { id: "sp01-b1", sourceFile: "sp01-b1.sg2" });
    expect(g.id).toBe("sp01-b1");
    expect(g.sampleIntervalS).toBe(0.00025);
    expect(g.startTimeS).toBe(-0.01);
    expect(g.sampleCount).toBe(2);
    // DESCALING_FACTOR multiplies the stored numbers (SEG-2 standard, trace descriptor keywords).
    expect(Array.from(g.data)).toEqual([5, -2, 0, 0]);
    const [a, b] = g.traces;
    expect(a).toMatchObject({ channel: 5, sourceX: -1.25, receiverX: 4.5, offset: 5.75, stackCount: 3, dead: false, sourcePoint: 0, blow: 0, component: "z" });
    expect(b.channel).toBe(2);
    expect(b.sourceX).toBeNaN();
    expect(b.receiverX).toBeNaN();
    expect(b.stackCount).toBe(1);
    expect(b.dead).toBe(true);
  });

  it("rejects traces that differ in sample count, naming the descriptor", () => {
    const bytes = writeSeg2({
      fileStrings: {},
      traces: [
        { strings: { SAMPLE_INTERVAL: "0.001" }, samples: [1, 2, 3] },
        { strings: { SAMPLE_INTERVAL: "0.001" }, samples: [1, 2] },
      ],
    });
    const f = readSeg2(bytes, "x.sg2");
    const err = catchError(() => seg2ToGather(f, "x.sg2", { id: "x", sourceFile: "x.sg2" }));
    expect(err).toBeInstanceOf(FileFormatError);
    expect(err.details.byteOffset).toBe(f.traces[1].descriptorOffset + 8);
  });

  it("writes a gather and reads back the same positions and samples", () => {
    const ns = 8;
    const data = new Float32Array(2 * ns).map((_, i) => i - 3.5);
    const gather = {
      id: "g",
      sampleIntervalS: 0.00025,
      sampleCount: ns,
      startTimeS: -0.01,
      data,
      traces: [0, 1].map((i) => ({
        sourceFile: "g.sg2",
        channel: i + 1,
        sourcePoint: 0,
        blow: 0,
        sourceX: -1,
        sourceZ: 0,
        receiverX: i * 1.01,
        receiverZ: i === 1 ? 2.5 : 0,
        offset: i * 1.01 + 1,
        stackCount: 1,
        component: "z" as const,
        dead: false,
      })),
    };
    for (const byteOrder of ["little", "big"] as const) {
      const back = seg2ToGather(readSeg2(writeGatherAsSeg2(gather, {}, { byteOrder }), "g.sg2"), "g.sg2", { id: "g", sourceFile: "g.sg2" });
      expect(Array.from(back.data)).toEqual(Array.from(data));
      expect(back.traces.map((t) => [t.receiverX, t.receiverZ])).toEqual([
        [0, 0],
        [1.01, 2.5],
      ]);
      expect(back.startTimeS).toBe(-0.01);
    }
  });
});

const catchError = (fn: () => unknown) => catchFileError<FileFormatError>(fn);

describe("malformed and truncated SEG-2 files", () => {
  const ns = 10;
  const file = writeSeg2({
    fileStrings: { COMPANY: "Corvell" },
    traces: [1, 2].map((c) => ({ strings: { CHANNEL_NUMBER: String(c), SAMPLE_INTERVAL: "0.00025" }, samples: new Float32Array(ns).fill(c) })),
  });
  const read = readSeg2(file, "ok.sg2");
  const p1 = read.traces[0].descriptorOffset;
  const p2 = read.traces[1].descriptorOffset;
  const view = new DataView(file.buffer);
  const x2 = view.getUint16(p2 + 2, true);

  it("throws FileFormatError (never a RangeError) at every cut point, at or before the cut", () => {
    for (let cut = 0; cut < file.length; cut++) {
      const err = catchError(() => readSeg2(file.slice(0, cut), "cut.sg2"));
      expect(err, `cut at ${cut}`).toBeInstanceOf(FileFormatError);
      expect(err.code).toBe("bad-file");
      expect(err.details.file).toBe("cut.sg2");
      expect(err.details.byteOffset!).toBeLessThanOrEqual(cut);
    }
  });

  it("names the structure the file ends in", () => {
    const at = (cut: number) => catchError(() => readSeg2(file.slice(0, cut), "cut.sg2")).details.byteOffset;
    expect(at(20)).toBe(0); // inside the 32-byte file descriptor block
    expect(at(34)).toBe(32); // inside the trace pointer sub-block
    expect(at(p2 + 10)).toBe(p2); // inside trace 2's fixed 32 bytes
    expect(at(p2 + 33)).toBe(p2); // inside trace 2's descriptor strings
    expect(at(p2 + x2 + 4 * 5)).toBe(p2 + x2); // mid-data of trace 2
    expect(at(file.length - 1)).toBe(p2 + x2); // last byte missing
  });

  it("rejects corrupt block IDs and fields with their byte offsets", () => {
    const corrupt = (edit: (b: Uint8Array, v: DataView) => void) => {
      const b = file.slice();
      edit(b, new DataView(b.buffer));
      return catchError(() => readSeg2(b, "bad.sg2"));
    };
    let e = corrupt((b) => (b[0] = 0x00));
    expect(e.details.byteOffset).toBe(0);
    expect(e.details.expected).toContain("0x3a55");
    e = corrupt((_, v) => v.setUint16(p2, 0x4423, true));
    expect(e.details.byteOffset).toBe(p2);
    expect(e.details.expected).toBe("0x4422");
    e = corrupt((b) => (b[p1 + 12] = 9));
    expect(e.details.byteOffset).toBe(p1 + 12);
    e = corrupt((_, v) => v.setUint32(32 + 4, 8, true)); // pointer 2 into the file descriptor block
    expect(e.details.byteOffset).toBe(36);
    e = corrupt((b) => (b[8] = 5)); // string terminator size
    expect(e.details.byteOffset).toBe(8);
    e = corrupt((_, v) => v.setUint16(4, 4, true)); // pointer sub-block too small for 2 traces
    expect(e.details.byteOffset).toBe(4);
    e = corrupt((_, v) => v.setUint32(p1 + 4, 8, true)); // data block smaller than 10 float32
    expect(e.details.byteOffset).toBe(p1 + 4);
    e = corrupt((_, v) => v.setUint16(p1 + 32, 4000, true)); // first trace string runs past its block
    expect(e.details.byteOffset).toBe(p1 + 32);
  });
});
