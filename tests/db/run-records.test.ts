/**
 * The engine's run records (db/queries/run-records.ts, intermediates.ts): a queued run is claimed
 * by one process only, only its owner can finish it, and intermediate results and checkpoints
 * are kept as specified in DEVELOPERS.md (our own design; no outside reference involved).
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../db/client";
import { RecordError } from "../../db/errors";
import { claimQueuedRun, finishOwnedRun, getRunRecord, getRunStepRecords, insertQueuedRun } from "../../db/queries/run-records";
import { findCheckpoint, listIntermediates, recordIntermediateRow, saveCheckpointRow } from "../../db/queries/intermediates";
import { ensureDataset } from "../../db/queries/datasets";
import { savePipelineVersion } from "../../db/queries/pipelines";
import { ensureSurvey } from "../../db/queries/surveys";
import { runSteps } from "../../db/schema";
import { eq } from "drizzle-orm";

const actor = { userId: null, label: "tester", door: "cli" as const };
let tmp: string;
let db: Db;

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-db-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  db = getDb();
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

function queuedRun(): number {
  const { survey } = ensureSurvey(db, "db-site", null);
  const { version } = savePipelineVersion(db, {
    name: "db-check",
    surveyId: survey.id,
    sourceText: "x",
    sourcePath: null,
    definition: { steps: [] },
    contentHash: "h",
    actor,
  } as never);
  const dataset = ensureDataset(db, { folderPath: "", contentHash: "d", files: [], surveyId: survey.id, profileId: null, name: "none" });
  return insertQueuedRun(db, {
    pipelineVersionId: version.id,
    datasetId: dataset.id,
    actor,
    steps: [{ label: "a", stepId: "s", stepVersion: 1, paramsJson: "{}" }],
    parentRunId: null,
    rerunFromStep: null,
    overrides: {},
    geometryTableHash: null,
  });
}

describe("run records", () => {
  it("a queued run is claimed once; only the owning process finishes it", () => {
    const runId = queuedRun();
    expect(claimQueuedRun(db, runId, 1111, new Date())).toBe(true);
    expect(claimQueuedRun(db, runId, 2222, new Date())).toBe(false);
    expect(finishOwnedRun(db, runId, 2222, { status: "succeeded" })).toBe(false);
    expect(getRunRecord(db, runId).status).toBe("running");
    expect(finishOwnedRun(db, runId, 1111, { status: "failed", error: "x" })).toBe(true);
    expect(getRunRecord(db, runId).status).toBe("failed");
    expect(() => getRunRecord(db, 987654)).toThrow(RecordError);
  });

  it("intermediate results: one per kind and index (a redone one replaces it), ordered; a cache hit shows its source's", () => {
    const [source] = getRunStepRecords(db, queuedRun());
    const [hit] = getRunStepRecords(db, queuedRun());
    db.update(runSteps).set({ cacheSourceStepId: source.id }).where(eq(runSteps.id, hit.id)).run();
    recordIntermediateRow(db, { runStepId: source.id, kind: "model", index: 1, artifactHash: "b".repeat(64) });
    recordIntermediateRow(db, { runStepId: source.id, kind: "model", index: 0, artifactHash: "a".repeat(64), meta: { misfit: 2 } });
    recordIntermediateRow(db, { runStepId: source.id, kind: "model", index: 1, label: "again", artifactHash: "c".repeat(64) });
    const rows = listIntermediates(db, source.id).map((r) => [r.kind, r.index, r.label, r.artifactHash[0], r.meta]);
    expect(rows).toEqual([
      ["model", 0, null, "a", { misfit: 2 }],
      ["model", 1, "again", "c", null],
    ]);
    expect(listIntermediates(db, hit.id)).toEqual(listIntermediates(db, source.id));
  });

  it("a checkpoint under a cache key is replaced by the next one", () => {
    expect(findCheckpoint(db, "key-1")).toBeNull();
    saveCheckpointRow(db, "key-1", "a".repeat(64));
    saveCheckpointRow(db, "key-1", "b".repeat(64));
    expect(findCheckpoint(db, "key-1")).toBe("b".repeat(64));
  });
});
