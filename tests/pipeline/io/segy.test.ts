/**
 * SEG-Y reader and writer against the byte positions of SEG-Y revision 2.0 (SEG Technical
 * Standards Committee, 2017, "SEG-Y_r2.0: SEG-Y revision 2.0 Data Exchange format"). Files are
 * built here by hand with a DataView at the documented (1-based) positions.
 */
import { describe, expect, it } from "vitest";
import { FileFormatError } from "../../../pipeline/errors";
import { encodeEbcdic } from "../../../pipeline/io/ebcdic";
import { readSegy, segyToGathers, writeGatherSetAsSegy, writeSegy } from "../../../pipeline/io/segy";
import type { Gather, GatherSet } from "../../../pipeline/types";
import { seededRandom } from "../../helpers/random";
import { catchError as catchFileError } from "../../helpers/catch-error";

/** Byte offset of a 1-based position in the trace header of trace `t` (samples of `width` bytes). */
const th = (t: number, pos: number, ns: number, width: number) => 3600 + t * (240 + ns * width) + pos - 1;

interface HandOpts {
  little?: boolean;
  format: number;
  width: number;
  ns: number;
  /** Rev 2.0 byte-order constant at 3297–3300 and revision 2 at 3501. */
  rev2?: boolean;
  ascii?: boolean;
  putSample: (v: DataView, at: number, k: number, t: number, le: boolean) => void;
  traces?: number;
}

function handSegy(o: HandOpts): Uint8Array {
  const le = o.little ?? false;
  const nTr = o.traces ?? 2;
  const bytes = new Uint8Array(3600 + nTr * (240 + o.ns * o.width));
  const v = new DataView(bytes.buffer);
  const text = "C 1 CLIENT QUILLMOOR EDUCATION TRUST".padEnd(80) + "C 2 LINE QM-1".padEnd(80);
  bytes.set(o.ascii ? new TextEncoder().encode(text) : encodeEbcdic(text), 0);
  const b = (pos: number) => pos - 1;
  v.setInt32(b(3205), 7, le); // line number
  v.setUint16(b(3213), nTr, le);
  v.setUint16(b(3217), 250, le); // sample interval, µs
  v.setUint16(b(3221), o.ns, le); // samples per trace
  v.setUint16(b(3225), o.format, le);
  v.setUint16(b(3255), 1, le); // metres
  if (o.rev2) {
    v.setUint32(b(3297), 16909060, le);
    bytes[b(3501)] = 2;
    bytes[b(3502)] = 0;
  }
  for (let t = 0; t < nTr; t++) {
    const h = (pos: number) => th(t, pos, o.ns, o.width);
    v.setInt32(h(1), t + 1, le);
    v.setInt32(h(9), 3, le); // field record
    v.setInt32(h(13), t + 1, le); // channel
    v.setInt16(h(29), 1, le);
    v.setInt16(h(31), 4, le); // vertically summed traces
    v.setInt32(h(37), 6, le); // offset
    v.setInt32(h(41), -50, le); // receiver elevation −0.5 m with scalar −100
    v.setInt16(h(69), -100, le);
    v.setInt16(h(71), -100, le); // coordinate scalar: divide by 100
    v.setInt32(h(73), -125, le); // source X −1.25 m
    v.setInt32(h(81), 450 + 100 * t, le); // group X 4.5 m, 5.5 m
    v.setInt16(h(109), -10, le); // delay recording time, ms
    v.setUint16(h(115), o.ns, le);
    v.setUint16(h(117), 250, le);
    for (let k = 0; k < o.ns; k++) o.putSample(v, h(241) + o.width * k, k, t, le);
  }
  return bytes;
}

const catchError = (fn: () => unknown) => catchFileError<FileFormatError>(fn);

describe("readSegy on hand-built files", () => {
  it("reads IBM floats (format 1), headers and scalars, big-endian rev 2.0", () => {
    // Wikipedia, "IBM hexadecimal floating-point": 0xC276A000 = −118.625; 0x41100000 = 1 (definition).
    const words = [0xc276a000, 0x41100000, 0x00000000, 0x40800000];
    const bytes = handSegy({ format: 1, width: 4, ns: 4, rev2: true, putSample: (v, at, k, _t, le) => v.setUint32(at, words[k], le) });
    const f = readSegy(bytes, "hand.sgy");
    expect(f.byteOrder).toBe("big");
    expect(f.textEncoding).toBe("ebcdic");
    expect(f.textHeader.split("\n")[0]).toBe("C 1 CLIENT QUILLMOOR EDUCATION TRUST");
    expect(f.binary).toMatchObject({ sampleIntervalUs: 250, sampleCount: 4, formatCode: 1, lineNumber: 7, revisionMajor: 2, revisionMinor: 0, measurementSystem: 1 });
    expect(f.traces).toHaveLength(2);
    expect(Array.from(f.traces[0].samples)).toEqual([-118.625, 1, 0, 0.5]);
    const h = f.traces[1].header;
    // Coordinate scalar −100 divides (SEG-Y rev 2.0, trace header bytes 71–72).
    expect(h).toMatchObject({ fieldRecord: 3, channel: 2, offset: 6, coordinateScalar: -100, sourceX: -1.25, groupX: 5.5, receiverElevation: -0.5, delayMs: -10, sampleCount: 4, sampleIntervalUs: 250, verticalStackCount: 4 });
    expect(f.traces[1].headerOffset).toBe(3600 + 240 + 16);
  });

  it("tells little-endian from the rev 2.0 byte-order constant 16909060 at 3297–3300", () => {
    const bytes = handSegy({ little: true, format: 5, width: 4, ns: 3, rev2: true, ascii: true, putSample: (v, at, k, _t, le) => v.setFloat32(at, k + 0.5, le) });
    // The constant 0x01020304 written little-endian shows as bytes 04 03 02 01.
    expect(Array.from(bytes.slice(3296, 3300))).toEqual([4, 3, 2, 1]);
    const f = readSegy(bytes, "le.sgy");
    expect(f.byteOrder).toBe("little");
    expect(f.textEncoding).toBe("ascii");
    expect(Array.from(f.traces[0].samples)).toEqual([0.5, 1.5, 2.5]);
    expect(f.traces[0].header.sourceX).toBe(-1.25);
  });

  it("tells the byte order of an older file without the constant by the format code", () => {
    for (const little of [false, true]) {
      const bytes = handSegy({ little, format: 3, width: 2, ns: 3, putSample: (v, at, k, t, le) => v.setInt16(at, (k - 1) * 1000 + t, le) });
      const f = readSegy(bytes, "old.sgy");
      expect(f.byteOrder).toBe(little ? "little" : "big");
      expect(Array.from(f.traces[1].samples)).toEqual([-999, 1, 1001]);
    }
  });

  it("reads int32 (format 2) and int8 (format 8) samples", () => {
    let f = readSegy(handSegy({ format: 2, width: 4, ns: 2, rev2: true, putSample: (v, at, k, _t, le) => v.setInt32(at, k ? -2000000 : 123, le) }), "i32.sgy");
    expect(Array.from(f.traces[0].samples)).toEqual([123, -2000000]);
    f = readSegy(handSegy({ format: 8, width: 1, ns: 3, rev2: true, putSample: (v, at, k) => v.setInt8(at, [-128, 0, 127][k]) }), "i8.sgy");
    expect(Array.from(f.traces[0].samples)).toEqual([-128, 0, 127]);
  });

  it("applies a positive coordinate scalar as a multiplier", () => {
    const bytes = handSegy({ format: 5, width: 4, ns: 1, rev2: true, traces: 1, putSample: () => {} });
    const v = new DataView(bytes.buffer);
    v.setInt16(th(0, 71, 1, 4), 10, false);
    v.setInt32(th(0, 73, 1, 4), 5, false);
    expect(readSegy(bytes, "s.sgy").traces[0].header.sourceX).toBe(50);
  });

  it("skips extended textual headers, counted (3505–3506) or ended by ((SEG: EndText))", () => {
    const base = handSegy({ format: 5, width: 4, ns: 2, rev2: true, traces: 1, putSample: (v, at, k, _t, le) => v.setFloat32(at, 7 + k, le) });
    for (const count of [2, -1]) {
      const records = 2;
      const bytes = new Uint8Array(base.length + 3200 * records);
      bytes.set(base.subarray(0, 3600), 0);
      bytes.set(base.subarray(3600), 3600 + 3200 * records);
      bytes.fill(0x40, 3600, 3600 + 3200 * records); // EBCDIC spaces
      bytes.set(encodeEbcdic("((SEG: EndText))"), 3600 + 3200);
      new DataView(bytes.buffer).setInt16(3504, count, false);
      const f = readSegy(bytes, "ext.sgy");
      expect(f.traces).toHaveLength(1);
      expect(Array.from(f.traces[0].samples)).toEqual([7, 8]);
    }
  });
});

function makeSet(seed: number): GatherSet {
  const rnd = seededRandom(seed);
  const ns = 50;
  const gathers: Gather[] = [0, 1].map((gi) => {
    const nTr = 3 + gi;
    return {
      id: `sp0${gi + 1}`,
      sampleIntervalS: 0.00025,
      sampleCount: ns,
      startTimeS: -0.01,
      data: rnd.fillGaussian(new Float32Array(nTr * ns), 100),
      traces: Array.from({ length: nTr }, (_, i) => ({
        sourceFile: `sp0${gi + 1}.sg2`,
        channel: i + 1,
        sourcePoint: gi + 1,
        blow: 0,
        sourceX: -1 + 2 * gi + 0.01 * i, // centimetres must survive
        sourceZ: 0.3,
        receiverX: i * 1.0 + 0.07,
        receiverZ: 0,
        offset: i * 1.0 + 0.07 - (-1 + 2 * gi + 0.01 * i),
        stackCount: 4,
        component: "z" as const,
        dead: i === 1,
      })),
    };
  });
  return { kind: "gathers", gathers };
}

describe("writeSegy / writeGatherSetAsSegy round trips", () => {
  for (const byteOrder of ["big", "little"] as const) {
    for (const formatCode of [5, 1] as const) {
      it(`${byteOrder}-endian, format ${formatCode}`, () => {
        const set = makeSet(3);
        const bytes = writeGatherSetAsSegy(set, { byteOrder, formatCode, title: "QUILLMOOR QM-1" });
        const f = readSegy(bytes, "out.sgy");
        expect(f.byteOrder).toBe(byteOrder);
        expect(f.binary.revisionMajor).toBe(2);
        expect(f.binary.formatCode).toBe(formatCode);
        const lines = f.textHeader.split("\n");
        expect(lines).toHaveLength(40);
        // SEG-Y rev 2.0: the last two textual header lines.
        expect(lines[38]).toBe("C39 SEG-Y_REV2.0");
        expect(lines[39]).toBe("C40 END TEXTUAL HEADER");
        expect(lines[0]).toContain("QUILLMOOR QM-1");
        const back = segyToGathers(f, "out.sgy", { id: "out" });
        expect(back.map((g) => g.id)).toEqual(["out-r1", "out-r2"]);
        back.forEach((g, gi) => {
          const src = set.gathers[gi];
          expect(g.sampleIntervalS).toBeCloseTo(0.00025, 15);
          expect(g.startTimeS).toBeCloseTo(-0.01, 15);
          expect(g.traces.map((t) => t.channel)).toEqual(src.traces.map((t) => t.channel));
          g.traces.forEach((t, i) => {
            const s = src.traces[i];
            // Scalar −100 stores centimetres: positions come back to within rounding of 1e-9 m.
            expect(t.sourceX).toBeCloseTo(s.sourceX, 9);
            expect(t.receiverX).toBeCloseTo(s.receiverX, 9);
            expect(t.sourceZ).toBeCloseTo(0.3, 9);
            expect(t.offset).toBeCloseTo(s.offset, 9);
            expect(t.stackCount).toBe(4);
            expect(t.dead).toBe(s.dead);
          });
          if (formatCode === 5) {
            expect(Array.from(g.data)).toEqual(Array.from(src.data));
          } else {
            // IBM carries 21–24 significant bits (IBM System/360 Principles of Operation): relative
            // error at most 2^-21 per sample.
            for (let k = 0; k < g.data.length; k++) expect(Math.abs(g.data[k] - src.data[k])).toBeLessThanOrEqual(Math.abs(src.data[k]) * 2 ** -21);
          }
        });
      });
    }
  }

  it("fills the binary header at the rev 2.0 positions", () => {
    const bytes = writeSegy({ sampleIntervalS: 0.00025, sampleCount: 2000, startTimeS: -0.0105, traces: [] });
    const v = new DataView(bytes.buffer);
    expect(v.getUint16(3216, false)).toBe(250); // 3217–3218
    expect(v.getUint16(3220, false)).toBe(2000); // 3221–3222
    expect(v.getUint16(3224, false)).toBe(5); // 3225–3226: IEEE float
    expect(v.getUint32(3296, false)).toBe(16909060); // 3297–3300
    expect([bytes[3500], bytes[3501]]).toEqual([2, 0]); // 3501, 3502
    expect(v.getUint16(3502, false)).toBe(1); // 3503–3504 fixed-length traces
  });

  it("writes the trace count at 3513–3520 and the first-trace offset at 3521–3528 (rev 2.0)", () => {
    // SEG-Y rev 2.0 (SEG 2017), binary file header table: 3513–3520 "number of traces in this
    // file or stream" and 3521–3528 "byte offset of first trace relative to start of file or
    // stream", both unsigned 64-bit integers in the file's byte order. Read here at those
    // positions with a bare DataView, not through the reader.
    for (const little of [false, true]) {
      const set = makeSet(4);
      const bytes = writeGatherSetAsSegy(set, { byteOrder: little ? "little" : "big" });
      const v = new DataView(bytes.buffer);
      expect(v.getBigUint64(3513 - 1, little)).toBe(7n); // 3 + 4 traces
      expect(v.getBigUint64(3521 - 1, little)).toBe(3600n); // no extended textual headers
      expect(v.getUint16(3511 - 1, little)).toBe(0); // 3511–3512 time basis code left unset
      expect(Array.from(bytes.slice(3528, 3600)).every((b) => b === 0)).toBe(true); // unassigned
    }
  });

  it("reads a standard rev 2.0 file whose first-trace offset (3521–3528) leaves a gap", () => {
    // A standard writer may place the first trace anywhere after the headers; 3521–3528 says
    // where. 512 filler bytes here, trace count 2 at 3513–3520.
    const plain = handSegy({ format: 5, width: 4, ns: 3, rev2: true, putSample: (v, at, k, t, le) => v.setFloat32(at, 10 * t + k, le) });
    const gap = 512;
    const bytes = new Uint8Array(plain.length + gap);
    bytes.set(plain.subarray(0, 3600), 0);
    bytes.fill(0xff, 3600, 3600 + gap);
    bytes.set(plain.subarray(3600), 3600 + gap);
    const v = new DataView(bytes.buffer);
    v.setBigUint64(3513 - 1, 2n, false);
    v.setBigUint64(3521 - 1, BigInt(3600 + gap), false);
    const f = readSegy(bytes, "gap.sgy");
    expect(f.traces).toHaveLength(2);
    expect(f.traces[0].headerOffset).toBe(3600 + gap);
    expect(Array.from(f.traces[1].samples)).toEqual([10, 11, 12]);
    // An announced count (3513–3520) larger than what the file holds is refused.
    v.setBigUint64(3513 - 1, 3n, false);
    const err = catchError(() => readSegy(bytes, "short.sgy"));
    expect(err).toBeInstanceOf(FileFormatError);
    expect(err.message).toContain("announces 3");
  });

  it("stores a fractional delay with a time scalar (bytes 215–216)", () => {
    const set = makeSet(5);
    for (const g of set.gathers) g.startTimeS = -0.0105;
    const bytes = writeGatherSetAsSegy(set);
    const v = new DataView(bytes.buffer);
    expect(v.getInt16(3600 + 108, false)).toBe(-105);
    expect(v.getInt16(3600 + 214, false)).toBe(-10);
    expect(segyToGathers(readSegy(bytes, "d.sgy"), "d.sgy", { id: "d" })[0].startTimeS).toBeCloseTo(-0.0105, 12);
  });

  it("refuses gathers of different sampling in one file", () => {
    const set = makeSet(9);
    set.gathers[1].sampleIntervalS = 0.0005;
    expect(() => writeGatherSetAsSegy(set)).toThrow(RangeError);
  });
});

describe("malformed and truncated SEG-Y files", () => {
  const ns = 4;
  const file = writeGatherSetAsSegy({
    kind: "gathers",
    gathers: [{ ...makeSet(1).gathers[0], sampleCount: ns, data: new Float32Array(3 * ns).fill(1) }],
  });
  const traceBytes = 240 + 4 * ns;

  it("throws FileFormatError at every cut point, at or before the cut", () => {
    // Every cut from 3150 on (before that the answer is the same "textual header" error; cuts of
    // 0..3150 are sampled every 50 bytes).
    const cuts = [...Array.from({ length: 64 }, (_, i) => i * 50), ...Array.from({ length: file.length - 3150 }, (_, i) => 3150 + i)];
    for (const cut of cuts) {
      const err = catchError(() => readSegy(file.slice(0, cut), "cut.sgy"));
      expect(err, `cut at ${cut}`).toBeInstanceOf(FileFormatError);
      expect(err.details.byteOffset!).toBeLessThanOrEqual(cut);
    }
  });

  it("names the structure the file ends in", () => {
    const at = (cut: number) => catchError(() => readSegy(file.slice(0, cut), "cut.sgy")).details.byteOffset;
    expect(at(100)).toBe(0); // textual header
    expect(at(3300)).toBe(3200); // binary header
    expect(at(3600)).toBe(3600); // no traces
    expect(at(3600 + 100)).toBe(3600); // trace 1 header
    expect(at(3600 + 240 + 8)).toBe(3600 + 240); // trace 1 samples
    expect(at(3600 + traceBytes)).toBe(3600 + traceBytes); // cut at a trace boundary: fewer traces than announced
  });

  it("rejects unknown format codes and bad header counts with their byte offsets", () => {
    const corrupt = (edit: (v: DataView) => void) => {
      const b = file.slice();
      edit(new DataView(b.buffer));
      return catchError(() => readSegy(b, "bad.sgy"));
    };
    expect(corrupt((v) => (v.setUint32(3296, 0), v.setUint16(3224, 99))).details.byteOffset).toBe(3224);
    expect(corrupt((v) => v.setUint16(3224, 4, false)).details.byteOffset).toBe(3224);
    expect(corrupt((v) => v.setInt16(3504, -5, false)).details.byteOffset).toBe(3504);
    expect(corrupt((v) => v.setInt32(3506, 2, false)).details.byteOffset).toBe(3506);
    expect(corrupt((v) => v.setInt16(3504, 3, false)).details.byteOffset).toBe(3600);
  });
});
