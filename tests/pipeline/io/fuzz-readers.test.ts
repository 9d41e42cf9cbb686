/**
 * Property test of the field-file readers with fast-check: mutated SEG-2 and SEG-Y files (byte
 * flips, truncation, header fields set to extremes) are read or refused, never crash: every
 * refusal is a FileFormatError with a byte offset inside the file, and every gather read holds
 * only finite samples. `npm test` runs a few hundred cases per format; `npm run test:fuzz` runs
 * 10,000 (TRACEWRIGHT_FUZZ_RUNS). The slowest case is printed (a hang would be over 2 s).
 */
import fc from "fast-check";
import { describe, expect, it } from "vitest";
import { FileFormatError } from "../../../pipeline/errors";
import { readSeg2, seg2ToGather, writeSeg2 } from "../../../pipeline/io/seg2";
import { readSegy, segyToGathers, writeGatherSetAsSegy } from "../../../pipeline/io/segy";
import type { Gather } from "../../../pipeline/types";
import { seededRandom } from "../../helpers/random";

const RUNS = Number(process.env.TRACEWRIGHT_FUZZ_RUNS ?? 300);
const SEED = 20261202;

function seg2Sample(formatCode: 1 | 2 | 3 | 4 | 5): Uint8Array {
  const rnd = seededRandom(7);
  return writeSeg2(
    {
      fileStrings: { UNITS: "METERS", NOTE: "QM-1 line\nsecond line" },
      traces: Array.from({ length: 3 }, (_, i) => ({
        strings: { CHANNEL_NUMBER: String(i + 1), SAMPLE_INTERVAL: "0.00025", DELAY: "-0.01", SOURCE_LOCATION: "-1", RECEIVER_LOCATION: String(i), STACK: "2" },
        samples: rnd.fillGaussian(new Float32Array(24), 1000),
      })),
    },
    { formatCode, byteOrder: formatCode % 2 ? "little" : "big" },
  );
}

function segySample(formatCode: 1 | 5, byteOrder: "big" | "little"): Uint8Array {
  const rnd = seededRandom(11);
  const gathers: Gather[] = [0, 1].map((g) => ({
    id: `sp${g}`,
    sampleIntervalS: 0.00025,
    sampleCount: 16,
    startTimeS: 0,
    data: rnd.fillGaussian(new Float32Array(3 * 16), 100),
    traces: Array.from({ length: 3 }, (_, i) => ({
      sourceFile: "x", channel: i + 1, sourcePoint: g + 1, blow: 0, sourceX: g, sourceZ: 0, receiverX: i, receiverZ: 0, offset: i - g, stackCount: 1, component: "z" as const, dead: false,
    })),
  }));
  return writeGatherSetAsSegy({ kind: "gathers", gathers }, { formatCode, byteOrder });
}

/** Header byte offsets worth setting to extremes: counts, sizes, pointers, codes. */
const SEG2_FIELDS = [2, 4, 6, 8, 11, 32, 36, 40];
const SEGY_FIELDS = [3212, 3216, 3220, 3224, 3268, 3272, 3296, 3500, 3502, 3504, 3506, 3512, 3520, 3600 + 114, 3600 + 116, 3600 + 68, 3600 + 70, 3600 + 214];
const EXTREMES = [0, 1, 0x7f, 0x80, 0xff, 0x7fff, 0x8000, 0xffff, 0x7fffffff, 0x80000000, 0xffffffff];

type Mutation = { kind: "flip"; at: number; value: number } | { kind: "cut"; at: number } | { kind: "field"; field: number; width: 1 | 2 | 4 | 8; value: number; little: boolean };

function mutationArb(length: number, fields: number[], seg2Descriptor: boolean): fc.Arbitrary<Mutation[]> {
  const one: fc.Arbitrary<Mutation> = fc.oneof(
    fc.record({ kind: fc.constant("flip" as const), at: fc.nat(length - 1), value: fc.nat(255) }),
    fc.record({ kind: fc.constant("cut" as const), at: fc.nat(length) }),
    fc.record({
      kind: fc.constant("field" as const),
      field: seg2Descriptor ? fc.oneof(fc.constantFrom(...fields), fc.nat(length - 1)) : fc.constantFrom(...fields),
      width: fc.constantFrom(1 as const, 2 as const, 4 as const, 8 as const),
      value: fc.constantFrom(...EXTREMES),
      little: fc.boolean(),
    }),
  );
  return fc.array(one, { minLength: 1, maxLength: 6 });
}

function mutate(base: Uint8Array, ms: Mutation[]): Uint8Array {
  let b = base.slice();
  for (const m of ms) {
    if (m.kind === "flip") {
      if (m.at < b.length) b[m.at] = m.value;
    } else if (m.kind === "cut") b = b.slice(0, Math.min(m.at, b.length));
    else {
      if (m.field + m.width > b.length) continue;
      const v = new DataView(b.buffer, b.byteOffset, b.byteLength);
      if (m.width === 1) v.setUint8(m.field, m.value & 0xff);
      else if (m.width === 2) v.setUint16(m.field, m.value & 0xffff, m.little);
      else if (m.width === 4) v.setUint32(m.field, m.value >>> 0, m.little);
      else v.setBigUint64(m.field, BigInt(m.value) * 0x100000001n, m.little);
    }
  }
  return b;
}

interface Tally {
  cases: number;
  read: number;
  refused: number;
  slowestMs: number;
  over2s: number;
}

/** Reads `bytes`; returns "read" or "refused", throws anything that is not a located FileFormatError. */
function readOrRefuse(bytes: Uint8Array, read: (b: Uint8Array) => Gather[]): "read" | "refused" {
  try {
    const gathers = read(bytes);
    for (const g of gathers) if (!g.data.every(Number.isFinite)) throw new Error(`gather ${g.id} holds non-finite samples`);
    return "read";
  } catch (err) {
    if (!(err instanceof FileFormatError)) throw err;
    const at = err.details.byteOffset;
    if (typeof at !== "number" || !Number.isInteger(at) || at < 0 || at > bytes.length) throw new Error(`refusal without a byte offset inside the file: ${err.message}`);
    return "refused";
  }
}

function fuzz(name: string, bases: Uint8Array[], fields: number[], read: (b: Uint8Array) => Gather[], seg2: boolean): Tally {
  const tally: Tally = { cases: 0, read: 0, refused: 0, slowestMs: 0, over2s: 0 };
  const perBase = Math.ceil(RUNS / bases.length);
  bases.forEach((base, bi) => {
    fc.assert(
      fc.property(mutationArb(base.length, fields, seg2), (ms) => {
        const bytes = mutate(base, ms);
        const t0 = performance.now();
        const outcome = readOrRefuse(bytes, read);
        const ms_ = performance.now() - t0;
        tally.cases++;
        tally[outcome]++;
        tally.slowestMs = Math.max(tally.slowestMs, ms_);
        if (ms_ > 2000) tally.over2s++;
      }),
      { numRuns: perBase, seed: SEED + bi, endOnFailure: true },
    );
  });
  process.stdout.write(
    `fuzz ${name}: ${tally.cases} mutated files, ${tally.read} read, ${tally.refused} refused with a byte offset, 0 crashes, slowest ${tally.slowestMs.toFixed(1)} ms, ${tally.over2s} over 2 s\n`,
  );
  return tally;
}

describe("readers under mutated input (fast-check)", () => {
  it(`SEG-2: ${RUNS} mutated files read or refused with a byte offset`, () => {
    const bases = ([1, 2, 3, 4, 5] as const).map(seg2Sample);
    const t = fuzz("SEG-2", bases, SEG2_FIELDS, (b) => [seg2ToGather(readSeg2(b, "f.sg2"), "f.sg2", { id: "f", sourceFile: "f.sg2" })], true);
    expect(t.cases).toBeGreaterThanOrEqual(RUNS);
    expect(t.refused).toBeGreaterThan(0);
  });

  it(`SEG-Y: ${RUNS} mutated files read or refused with a byte offset`, () => {
    const bases = [segySample(5, "big"), segySample(1, "big"), segySample(5, "little"), segySample(1, "little")];
    const t = fuzz("SEG-Y", bases, SEGY_FIELDS, (b) => segyToGathers(readSegy(b, "f.sgy"), "f.sgy", { id: "f" }), false);
    expect(t.cases).toBeGreaterThanOrEqual(RUNS);
    expect(t.refused).toBeGreaterThan(0);
  });
});
