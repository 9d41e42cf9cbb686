/**
 * Watched folders: a folder copied in runs once its files stop changing; a half-written file
 * is not read; the same content runs once, also after a restart; ignored files are recorded.
 * (Behaviour of our own design; chokidar's write-finish detection does the file watching.)
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../../db/client";
import { watchEvents } from "../../../db/schema";
import { getRun, listRuns } from "../../../db/queries/runs";
import { readArtifactSync } from "../../../pipeline/artifact-store";
import { watchFieldFolders, type FolderWatcher } from "../../../pipeline/watch";
import { registerEngineTestSteps } from "../../helpers/engine-steps";

let tmp: string;
let db: Db;
let root: string;
let pipelinePath: string;
const actor = { userId: null, label: "watcher", door: "watcher" as const };

const until = async (cond: () => boolean, ms = 20_000) => {
  const end = Date.now() + ms;
  while (!cond()) {
    if (Date.now() > end) throw new Error("timed out waiting");
    await new Promise((r) => setTimeout(r, 50));
  }
};

const startWatcher = (): FolderWatcher =>
  watchFieldFolders(db, { root, pipelinePath, quietMs: 300, writeFinishMs: 300, actor });

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-watch-"));
  process.env.TRACEWRIGHT_DATA_DIR = path.join(tmp, "data");
  registerEngineTestSteps();
  db = getDb();
  root = path.join(tmp, "incoming");
  fs.mkdirSync(root);
  pipelinePath = path.join(tmp, "watch.yaml");
  fs.writeFileSync(
    pipelinePath,
    "name: watch-check\nsurvey: test-site\nfieldData: ./incoming\nsteps:\n  - step: test-list-files\n",
  );
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

const runsSoFar = () => listRuns(db, { pipelineName: "watch-check", pageSize: 100 }).rows;

describe("watched folders", () => {
  it("runs a copied-in folder once its files are complete, and only once for the same content", async () => {
    const watcher = startWatcher();
    await watcher.ready;
    const folder = path.join(root, "day-1");
    fs.mkdirSync(folder);
    // A slow copy: the file grows in pieces; it must not be read half-written.
    const fd = fs.openSync(path.join(folder, "shot-1.dat"), "w");
    for (let i = 0; i < 5; i++) {
      fs.writeSync(fd, Buffer.alloc(1000, i));
      await new Promise((r) => setTimeout(r, 120));
    }
    fs.closeSync(fd);
    fs.writeFileSync(path.join(folder, "shot-2.dat"), Buffer.alloc(500, 7));
    fs.writeFileSync(path.join(folder, "shot-9.dat.part"), "a copy still under way");
    await until(() => runsSoFar().some((r) => r.status === "succeeded"));
    await watcher.idle();
    const [run] = runsSoFar();
    expect(run.door).toBe("watcher");
    const report = readArtifactSync(getRun(db, run.id)!.steps[0].outputs.report) as { data: Array<{ name: string; size: number }> };
    expect(report.data).toEqual([
      { name: "shot-1.dat", size: 5000 },
      { name: "shot-2.dat", size: 500 },
    ]);
    await until(() => db.select().from(watchEvents).all().some((e) => e.event === "ignored" && e.file === "shot-9.dat.part"));

    // The same content copied again into another folder runs once only.
    const again = path.join(root, "day-1-copy");
    fs.cpSync(folder, again, { recursive: true });
    await until(() => db.select().from(watchEvents).all().some((e) => e.event === "run-skipped"));
    await watcher.idle();
    expect(runsSoFar()).toHaveLength(1);
    await watcher.close();
  });

  it("a restarted watcher does not redo folders it already processed, but runs changed ones", async () => {
    const watcher = startWatcher();
    await watcher.ready;
    await new Promise((r) => setTimeout(r, 800));
    await watcher.idle();
    expect(runsSoFar()).toHaveLength(1);
    fs.writeFileSync(path.join(root, "day-1", "shot-3.dat"), Buffer.alloc(300, 1));
    await until(() => runsSoFar().length === 2 && runsSoFar()[0].status === "succeeded");
    await watcher.idle();
    await watcher.close();
    expect(getRun(db, runsSoFar()[0].id)!.datasetFolder).toBe(path.join(root, "day-1"));
  });

  it("runs the same folders again when the pipeline changes, and refuses a broken pipeline at start", async () => {
    const before = runsSoFar().length;
    fs.writeFileSync(
      pipelinePath,
      "name: watch-check\ndescription: changed\nsurvey: test-site\nfieldData: ./incoming\nsteps:\n  - step: test-list-files\n",
    );
    const watcher = startWatcher();
    await watcher.ready;
    await until(() => runsSoFar().length >= before + 2 && runsSoFar().every((r) => r.status === "succeeded"));
    await new Promise((r) => setTimeout(r, 800));
    await watcher.idle();
    await watcher.close();
    // day-1 (three files by now) and its copy (two) differ: one run each for the new version.
    expect(runsSoFar()).toHaveLength(before + 2);
    expect(runsSoFar()[0].pipelineVersion).toBe(2);

    fs.writeFileSync(pipelinePath, "name: watch-check\nsurvey: test-site\nsteps:\n  - step: no-such-step\n");
    expect(() => startWatcher()).toThrow(/watch\.yaml line 4, steps\[0\]\.step: unknown step "no-such-step"/);
  });
});
