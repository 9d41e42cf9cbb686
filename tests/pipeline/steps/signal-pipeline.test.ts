/**
 * The signal steps from a pipeline file through the engine: run, rerun with an override (earlier
 * steps come from the cache), and bad settings reported before any work.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../../db/client";
import { getRun } from "../../../db/queries/runs";
import { readArtifactSync } from "../../../pipeline/artifact-store";
import { createRun, executeRun } from "../../../pipeline/runner";
import type { MuteSet, PickSet, SpectrumSet } from "../../../pipeline/types";
import { writeQuillmoorSurvey } from "../../../examples/quillmoor/make-field-data";

let tmp: string;
let db: Db;
const actor = { userId: null, label: "tester", door: "cli" as const };

function writePipeline(name: string, filterSettings: string): string {
  const file = path.join(tmp, `${name}.yaml`);
  fs.writeFileSync(
    file,
    `name: ${name}
survey: signal-site
fieldData: ./field
geometryTable: ./field/qm1-geometry.csv
steps:
  - step: import-records
  - step: geometry
  - step: vertical-stack
    settings: { method: mean }
  - step: time-window
    settings: { startMs: 0 }
  - step: frequency-filter
    settings: ${filterSettings}
  - step: first-arrivals
  - step: mute
    settings: { topMute: picks, pickMarginMs: 4 }
  - step: gain
    settings: { kind: trace-max }
  - step: line-source
  - step: spectra
    settings: { maxFrequencyHz: 250 }
`,
  );
  return file;
}

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-signal-"));
  process.env.TRACEWRIGHT_DATA_DIR = path.join(tmp, "data");
  db = getDb();
  writeQuillmoorSurvey(path.join(tmp, "field"), { sourcePoints: 2, blows: 2, channels: 12, recordLengthS: 0.2 });
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("signal steps in a pipeline", () => {
  it("run from a pipeline file, then rerun with a changed corner: earlier steps come from the cache", async () => {
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: writePipeline("signal", "{ lowCutHz: 8, highCutHz: 150, mainsHz: 50 }"), actor });
    const first = await executeRun(db, runId);
    expect(first.status, first.error).toBe("succeeded");
    const detail = getRun(db, runId)!;
    const byLabel = Object.fromEntries(detail.steps.map((s) => [s.label, s]));
    expect(byLabel["frequency-filter"].summary).toMatchObject({ effectiveOrder: 8, notchesHz: [50, 100, 150] });
    const picks = readArtifactSync(byLabel["first-arrivals"].outputs.picks) as PickSet;
    expect(picks.picks.length).toBeGreaterThan(0);
    const mutes = readArtifactSync(byLabel["mute"].outputs.mutes) as MuteSet;
    expect(mutes.lines.filter((l) => l.role === "top")).toHaveLength(2);
    expect(byLabel["gain"].summary).toMatchObject({ kind: "trace-max" });
    const spectra = readArtifactSync(byLabel["spectra"].outputs.spectra) as SpectrumSet;
    expect(spectra.gathers).toHaveLength(2);

    const rerunId = createRun(db, { source: "rerun", parentRunId: runId, fromLabel: "frequency-filter", overrides: { "frequency-filter": { highCutHz: 90 } }, actor }).runId;
    const second = await executeRun(db, rerunId);
    expect(second.status, second.error).toBe("succeeded");
    const steps = getRun(db, rerunId)!.steps;
    const hits = Object.fromEntries(steps.map((s) => [s.label, s.cacheHit]));
    expect(hits).toMatchObject({ "import-records": true, geometry: true, "vertical-stack": true, "time-window": true, "frequency-filter": false, spectra: false });
    expect(steps.find((s) => s.label === "frequency-filter")!.params).toMatchObject({ highCutHz: 90 });

    // The same settings again: every step is a cache hit.
    const sameId = createRun(db, { source: "rerun", parentRunId: runId, fromLabel: "frequency-filter", overrides: {}, actor }).runId;
    expect((await executeRun(db, sameId)).status).toBe("succeeded");
    expect(getRun(db, sameId)!.steps.every((s) => s.cacheHit)).toBe(true);
  });

  it("refuses a low corner above the high corner at the pipeline file's line", () => {
    const file = writePipeline("bad-corners", "{ lowCutHz: 200, highCutHz: 100 }");
    let err: unknown;
    try {
      createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    } catch (e) {
      err = e;
    }
    expect(err).toBeInstanceOf(Error);
    const e = err as Error & { details?: { line?: number; field?: string } };
    expect(e.message).toMatch(/lowCutHz/);
    expect(e.details?.line).toBe(13); // the settings line of frequency-filter
  });

  it("fails a corner at or above Nyquist with a clear message before filtering", async () => {
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: writePipeline("nyquist", "{ highCutHz: 2500 }"), actor });
    const outcome = await executeRun(db, runId);
    expect(outcome.status).toBe("failed");
    expect(outcome.error).toMatch(/highCutHz 2500 Hz is at or above the Nyquist frequency of gather/);
    const filter = getRun(db, runId)!.steps.find((s) => s.label === "frequency-filter")!;
    expect(filter.status).toBe("failed");
  });
});
