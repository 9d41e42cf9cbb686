/**
 * Read-throughput figures of the field-file readers, measured on files made in memory (a 48-channel,
 * 2000-sample record, the size of one Quillmoor blow). Prints nothing: the CLI `bench` command does.
 */
import { readSeg2, writeSeg2, type Seg2FormatCode } from "../io/seg2";
import { readSegy, writeSegy, type SegyWriteTrace } from "../io/segy";

export interface ReaderBench {
  /** SEG-2, format 4 (float32), little-endian (the usual recorder layout), MB/s. */
  seg2MBps: number;
  /** SEG-2, format 1 (int16), big-endian, MB/s. */
  seg2Int16BigEndianMBps: number;
  /** SEG-Y rev 2.0, IEEE float32 big-endian, MB/s. */
  segyMBps: number;
  /** SEG-Y, IBM float big-endian, MB/s. */
  segyIbmMBps: number;
  /** Size of each test file, bytes. */
  seg2FileBytes: number;
  segyFileBytes: number;
  /** Minimum measuring time per reader, s. */
  measureSeconds: number;
}

const CHANNELS = 48;
const SAMPLES = 2000;

function samples(channel: number): Float32Array {
  const s = new Float32Array(SAMPLES);
  // Deterministic, sign-changing values with a spread of magnitudes (no random source needed).
  for (let k = 0; k < SAMPLES; k++) s[k] = Math.round(3000 * Math.sin(0.013 * k * (channel + 1)) * Math.exp(-k / 900));
  return s;
}

function seg2File(formatCode: Seg2FormatCode, byteOrder: "little" | "big"): Uint8Array {
  return writeSeg2(
    {
      fileStrings: { COMPANY: "bench" },
      traces: Array.from({ length: CHANNELS }, (_, c) => ({
        strings: { CHANNEL_NUMBER: String(c + 1), SAMPLE_INTERVAL: "0.00025", DELAY: "-0.01", RECEIVER_LOCATION: String(c), SOURCE_LOCATION: "-1" },
        samples: samples(c),
      })),
    },
    { formatCode, byteOrder },
  );
}

function segyFile(formatCode: 1 | 5): Uint8Array {
  const traces: SegyWriteTrace[] = Array.from({ length: CHANNELS }, (_, c) => ({
    fieldRecord: 1,
    channel: c + 1,
    sourcePointNumber: 1,
    sourceX: -1,
    sourceZ: 0,
    receiverX: c,
    receiverZ: 0,
    offset: c + 1,
    stackCount: 1,
    dead: false,
    samples: samples(c),
  }));
  return writeSegy({ sampleIntervalS: 0.00025, sampleCount: SAMPLES, startTimeS: -0.01, traces }, { formatCode });
}

/** Reads `bytes` repeatedly for at least `seconds` and returns MB/s (10^6 bytes per second). */
function throughput(bytes: Uint8Array, read: (b: Uint8Array) => unknown, seconds: number): number {
  read(bytes); // warm-up
  let n = 0;
  const start = performance.now();
  let elapsed = 0;
  while (elapsed < seconds * 1000) {
    read(bytes);
    n++;
    elapsed = performance.now() - start;
  }
  return (n * bytes.length) / 1e6 / (elapsed / 1000);
}

/** Measures the read throughput of the SEG-2 and SEG-Y readers. */
export async function benchReaders(options: { measureSeconds?: number } = {}): Promise<ReaderBench> {
  const s = options.measureSeconds ?? 0.5;
  const seg2 = seg2File(4, "little");
  const seg2Int16 = seg2File(1, "big");
  const segy = segyFile(5);
  const segyIbm = segyFile(1);
  return {
    seg2MBps: throughput(seg2, (b) => readSeg2(b, "bench.sg2"), s),
    seg2Int16BigEndianMBps: throughput(seg2Int16, (b) => readSeg2(b, "bench.sg2"), s),
    segyMBps: throughput(segy, (b) => readSegy(b, "bench.sgy"), s),
    segyIbmMBps: throughput(segyIbm, (b) => readSegy(b, "bench.sgy"), s),
    seg2FileBytes: seg2.length,
    segyFileBytes: segy.length,
    measureSeconds: s,
  };
}
