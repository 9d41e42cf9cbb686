/**
 * Reproducing a run (pipeline/reproduce.ts) on a small field folder through the real steps
 * (import, geometry, vertical stack, band-pass): executed again in a scratch folder without the
 * cache, every artifact is compared by SHA-256 (FIPS 180-4, node:crypto) with the recorded one.
 * A stored artifact changed on disk, a setting changed in the database and a field file changed
 * in its folder must each be found. The numerical comparison (pipeline/reproduce-compare.ts) is
 * checked against the error bound of recursive summation (Higham 2002, §4.2, from memory).
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../../db/client";
import { listReproductions } from "../../../db/queries/reproductions";
import { createUser } from "../../../db/queries/users";
import { getRun } from "../../../db/queries/runs";
import { encodeArtifact } from "../../../pipeline/artifact-codec";
import { artifactFilePath, readArtifactSync } from "../../../pipeline/artifact-store";
import { reproduceRun } from "../../../pipeline/reproduce";
import { compareValues, DEFAULT_RELATIVE_TOLERANCE } from "../../../pipeline/reproduce-compare";
import { createRun, executeRun } from "../../../pipeline/runner";
import type { GatherSet } from "../../../pipeline/types";
import { writeQuillmoorSurvey } from "../../../examples/quillmoor/make-field-data";
import { mulberry32 } from "../../helpers/random";

let tmp: string;
let db: Db;
/** An auditor with a user record (the scratch database has no users: it must not need them). */
let actor: { userId: number | null; label: string; door: "cli" };

/** A run of the small pipeline; each test its own band-pass corner, so no test sees another's (changed) artifacts. */
async function freshRun(name: string, highCutHz: number): Promise<number> {
  const file = path.join(tmp, `${name}.yaml`);
  fs.writeFileSync(
    file,
    `name: ${name}
survey: test-site
fieldData: ./field
geometryTable: ./field/qm1-geometry.csv
steps:
  - step: import-records
  - step: geometry
  - step: vertical-stack
    settings: { method: mean }
  - step: frequency-filter
    settings: { lowCutHz: 8, highCutHz: ${highCutHz} }
`,
  );
  const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
  const outcome = await executeRun(db, runId);
  expect(outcome.status, outcome.error).toBe("succeeded");
  return runId;
}

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-reproduce-"));
  process.env.TRACEWRIGHT_DATA_DIR = path.join(tmp, "data");
  delete process.env.TRACEWRIGHT_DB;
  db = getDb();
  const auditor = createUser(db, { email: "auditor@example.org", name: "Audra Test", role: "auditor", password: "a-long-enough-password" });
  actor = { userId: auditor.id, label: auditor.name, door: "cli" };
  writeQuillmoorSurvey(path.join(tmp, "field"), { sourcePoints: 3, blows: 2, channels: 12, recordLengthS: 0.2 });
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("reproducing a run", { timeout: 120_000 }, () => {
  it("gives the recorded hash for every artifact and records the verdict", async () => {
    const runId = await freshRun("reproduce-same", 120);
    const steps: Array<{ fraction: number; message: string }> = [];
    const scratchDir = path.join(tmp, "scratch-same");
    const report = await reproduceRun(db, runId, { actor, scratchDir, onProgress: (fraction, message) => steps.push({ fraction, message }) });
    expect(report.error).toBeUndefined();
    expect(report.verdict).toBe("identical");
    const recorded = getRun(db, runId)!.steps;
    expect(report.steps.map((s) => s.label)).toEqual(recorded.map((s) => s.label));
    for (const [i, s] of report.steps.entries()) {
      expect(s.cacheKeyMatches).toBe(true);
      const outputs = s.artifacts.filter((a) => a.kind === "output");
      expect(Object.fromEntries(outputs.map((a) => [a.name, a.reproducedHash]))).toEqual(recorded[i].outputs);
      expect(outputs.every((a) => a.outcome === "identical" && a.recordedFileIntact)).toBe(true);
    }
    expect(report.counts.identical).toBeGreaterThanOrEqual(4);
    // Progress rose to the end; the verdict is recorded on the run, newest first.
    expect(steps.at(-1)?.fraction).toBe(1);
    // The child's steps are polled every 500 ms: a poll sees a running step or the count done so far
    // (which of the two depends on the machine's speed).
    expect(steps.some((p) => /step \d of 4|\d of 4 steps done/.test(p.message))).toBe(true);
    const stored = listReproductions(db, runId)[0];
    expect(stored.verdict).toBe("identical");
    expect(JSON.parse(stored.detailsJson!).steps).toHaveLength(4);
    // The scratch folder is gone afterwards.
    expect(fs.existsSync(scratchDir)).toBe(false);
  });

  it("finds a stored artifact that was changed on disk, with the size of the change", async () => {
    const runId = await freshRun("reproduce-artifact", 115);
    const hash = getRun(db, runId)!.steps[3].outputs.gathers;
    const set = readArtifactSync(hash) as GatherSet;
    const data = set.gathers[1].data;
    let peak = 0;
    for (const v of data) peak = Math.max(peak, Math.abs(v));
    // Change one sample that is not the peak by 1 % of the peak.
    const k = data.findIndex((v) => Math.abs(v) < 0.5 * peak);
    const before = data[k];
    data[k] = before + 0.01 * peak;
    const delta = Math.abs(data[k] - before); // as float32 holds it
    fs.writeFileSync(artifactFilePath(hash), encodeArtifact(set));

    const report = await reproduceRun(db, runId, { actor });
    expect(report.verdict).toBe("different");
    const bad = report.steps[3].artifacts.find((a) => a.name === "gathers")!;
    expect(bad.outcome).toBe("different");
    expect(bad.recordedFileIntact).toBe(false);
    expect(bad.reproducedHash).toBe(hash); // the reproduction gives what the run recorded
    expect(bad.maxAbsoluteDifference).toBeCloseTo(delta, 12);
    expect(bad.where).toBe("gathers[1].data");
    // The steps before it are untouched.
    expect(report.steps.slice(0, 3).every((s) => s.outcome === "identical")).toBe(true);
  });

  it("finds a setting changed in the database after the run", async () => {
    const runId = await freshRun("reproduce-setting", 110);
    db.$client.prepare("update run_steps set params_json = replace(params_json, '\"highCutHz\":110', '\"highCutHz\":90') where run_id = ? and label = 'frequency-filter'").run(runId);
    const report = await reproduceRun(db, runId, { actor });
    expect(report.verdict).toBe("different");
    const filter = report.steps[3];
    expect(filter.cacheKeyMatches).toBe(false);
    expect(filter.artifacts[0].recordedFileIntact).toBe(true);
    expect(filter.artifacts[0].outcome).toBe("different");
    expect(filter.artifacts[0].maxRelativeDifference).toBeGreaterThan(DEFAULT_RELATIVE_TOLERANCE);
    expect(report.steps.slice(0, 3).every((s) => s.outcome === "identical")).toBe(true);
  });

  it("fails, naming the file, when a recorded field file has changed", async () => {
    const runId = await freshRun("reproduce-input", 105);
    const victim = path.join(tmp, "field", "sp01-b1.sg2");
    const bytes = fs.readFileSync(victim);
    bytes[bytes.length - 1] ^= 0xff;
    fs.writeFileSync(victim, bytes);
    const report = await reproduceRun(db, runId, { actor });
    expect(report.verdict).toBe("failed");
    expect(report.error).toMatch(/sp01-b1\.sg2 has changed since run/);
    expect(listReproductions(db, runId)[0].verdict).toBe("failed");
  });
});

describe("comparing reproduced values", () => {
  it("accepts sums in another order within the summation error bound, and no more", () => {
    // 100 per-shot arrays summed first to last and last to first, in float32.
    const rand = mulberry32(14);
    const n = 100;
    const len = 500;
    const terms = Array.from({ length: n }, () => Float32Array.from({ length: len }, () => rand() * 2 - 1));
    const forward = new Float32Array(len);
    const backward = new Float32Array(len);
    for (let s = 0; s < n; s++) for (let i = 0; i < len; i++) forward[i] += terms[s][i];
    for (let s = n - 1; s >= 0; s--) for (let i = 0; i < len; i++) backward[i] += terms[s][i];
    const c = compareValues({ gradient: forward }, { gradient: backward });
    expect(c.sameShape).toBe(true);
    expect(c.maxRelativeDifference).toBeGreaterThan(0); // the order does matter in float32
    // Higham (2002) §4.2: |error of each order| ≤ γ(n−1) Σ|x|, so the two differ by at most twice that.
    const u = 2 ** -24;
    const gamma = ((n - 1) * u) / (1 - (n - 1) * u);
    let bound = 0;
    for (let i = 0; i < len; i++) {
      let abs = 0;
      for (let s = 0; s < n; s++) abs += Math.abs(terms[s][i]);
      bound = Math.max(bound, 2 * gamma * abs);
    }
    expect(c.maxAbsoluteDifference).toBeLessThanOrEqual(bound);
    expect(c.maxRelativeDifference).toBeLessThanOrEqual(DEFAULT_RELATIVE_TOLERANCE);
    // A real change is far outside it.
    const changed = backward.slice();
    changed[7] += 0.01;
    expect(compareValues({ gradient: forward }, { gradient: changed }).maxRelativeDifference).toBeGreaterThan(DEFAULT_RELATIVE_TOLERANCE);
  });

  it("names where the shapes part", () => {
    expect(compareValues({ a: [1, 2], s: "x" }, { a: [1, 2], s: "y" })).toMatchObject({ sameShape: false, shapeDifference: 's: "x" against "y"' });
    expect(compareValues({ a: new Float32Array(3) }, { a: new Float32Array(4) })).toMatchObject({ sameShape: false, shapeDifference: "a: 3 against 4 elements" });
    expect(compareValues({ a: new Float32Array(3) }, { a: new Float64Array(3) }).sameShape).toBe(false);
    expect(compareValues({ a: [NaN, 1] }, { a: [NaN, 1] })).toMatchObject({ sameShape: true, maxRelativeDifference: 0 });
  });
});
