/**
 * A folder of field files through the real steps (import, geometry, vertical stack), a bad
 * file among them, and the export as SEG-Y rev 2.0 checked at the standard's byte positions
 * (SEG-Y revision 2.0 data exchange format, SEG 2017: binary header bytes 3217-3218 sample
 * interval, 3221-3222 samples per trace, 3225-3226 format code (5 = IEEE float), 3501-3502
 * revision; trace header bytes 71-72 coordinate scalar, 73-76 source X, 81-84 group X,
 * 37-40 offset, 115-116 samples, 117-118 sample interval in microseconds; big-endian).
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../../db/client";
import { getRun } from "../../../db/queries/runs";
import { readArtifactSync } from "../../../pipeline/artifact-store";
import { exportArtifact } from "../../../pipeline/export";
import { createRun, executeRun } from "../../../pipeline/runner";
import type { GatherSet } from "../../../pipeline/types";
import { writeQuillmoorSurvey } from "../../../examples/quillmoor/make-field-data";

let tmp: string;
let db: Db;
const actor = { userId: null, label: "tester", door: "cli" as const };
const CHANNELS = 12;
const SOURCE_POINTS = 4;
const BLOWS = 3;

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-field-"));
  process.env.TRACEWRIGHT_DATA_DIR = path.join(tmp, "data");
  db = getDb();
  writeQuillmoorSurvey(path.join(tmp, "field"), { sourcePoints: SOURCE_POINTS, blows: BLOWS, channels: CHANNELS, recordLengthS: 0.2 });
  fs.writeFileSync(
    path.join(tmp, "pipeline.yaml"),
    `name: folder-check
survey: test-site
fieldData: ./field
geometryTable: ./field/qm1-geometry.csv
onBadFile: skip
steps:
  - step: import-records
  - step: geometry
  - step: vertical-stack
    settings: { method: mean }
`,
  );
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("a field folder end to end", () => {
  it("skips a truncated file with the reason recorded, stacks the rest and exports standard SEG-Y", async () => {
    // Truncate one blow mid-data: the run must go on without it.
    const victim = path.join(tmp, "field", "sp02-b2.sg2");
    const bytes = fs.readFileSync(victim);
    fs.writeFileSync(victim, bytes.subarray(0, Math.floor(bytes.length * 0.6)));

    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: path.join(tmp, "pipeline.yaml"), actor });
    const outcome = await executeRun(db, runId);
    expect(outcome.status, outcome.error).toBe("succeeded");
    const detail = getRun(db, runId)!;
    expect(detail.rejectedFiles).toHaveLength(1);
    expect(detail.rejectedFiles[0].name).toBe("sp02-b2.sg2");
    expect(detail.rejectedFiles[0].reason).toMatch(/sp02-b2\.sg2: byte \d+/);

    const stacked = readArtifactSync(detail.steps[2].outputs.gathers) as GatherSet;
    expect(stacked.gathers).toHaveLength(SOURCE_POINTS);
    const counts = stacked.gathers.map((g) => g.traces.find((t) => !t.dead)!.stackCount);
    expect(counts).toEqual([BLOWS, BLOWS - 1, BLOWS, BLOWS]);

    const segy = exportArtifact(stacked, "segy", "test export");
    const view = new DataView(segy.buffer, segy.byteOffset, segy.byteLength);
    const g0 = stacked.gathers[0];
    // Binary header (1-based byte numbers of the standard minus one).
    expect(view.getUint16(3216, false)).toBe(Math.round(g0.sampleIntervalS * 1e6));
    expect(view.getUint16(3220, false)).toBe(g0.sampleCount);
    expect(view.getUint16(3224, false)).toBe(5);
    expect(view.getUint16(3500, false)).toBe(0x0200);
    // Every trace header: scalar-applied coordinates and offset, samples and interval.
    const traceBytes = 240 + 4 * g0.sampleCount;
    let t = 0;
    for (const g of stacked.gathers) {
      for (const h of g.traces) {
        const base = 3600 + t * traceBytes;
        const scalar = view.getInt16(base + 70, false);
        const apply = (v: number) => (scalar < 0 ? v / -scalar : scalar > 0 ? v * scalar : v);
        expect(apply(view.getInt32(base + 72, false))).toBeCloseTo(h.sourceX, 2);
        expect(apply(view.getInt32(base + 80, false))).toBeCloseTo(h.receiverX, 2);
        expect(view.getInt32(base + 36, false)).toBe(Math.round(h.offset));
        expect(view.getUint16(base + 114, false)).toBe(g.sampleCount);
        expect(view.getUint16(base + 116, false)).toBe(Math.round(g.sampleIntervalS * 1e6));
        // First sample as IEEE float, big-endian.
        expect(view.getFloat32(base + 240, false)).toBe(g.data[g.traces.indexOf(h) * g.sampleCount]);
        t++;
      }
    }
    expect(segy.byteLength).toBe(3600 + t * traceBytes);
  });
});
