/**
 * Watched folders: a folder copied in runs once its files stop changing; a half-written file
 * is not read; the same content runs once, also after a restart; ignored files are recorded.
 * (Behaviour of our own design; chokidar's write-finish detection does the file watching.)
 * Each test has its own incoming folder and pipeline, and waits for what the watcher records
 * (runs, watch events), never for a fixed time.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../../db/client";
import { watchEvents, watchedFolders } from "../../../db/schema";
import { getRun, listRuns } from "../../../db/queries/runs";
import { readArtifactSync } from "../../../pipeline/artifact-store";
import { watchFieldFolders, type FolderWatcher } from "../../../pipeline/watch";
import { registerEngineTestSteps } from "../../helpers/engine-steps";

let tmp: string;
let db: Db;
const actor = { userId: null, label: "watcher", door: "watcher" as const };

const until = async (cond: () => boolean, ms = 30_000) => {
  const end = Date.now() + ms;
  while (!cond()) {
    if (Date.now() > end) throw new Error("timed out waiting");
    await new Promise((r) => setTimeout(r, 50));
  }
};

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-watch-"));
  process.env.TRACEWRIGHT_DATA_DIR = path.join(tmp, "data");
  registerEngineTestSteps();
  db = getDb();
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

/** A test's own incoming folder and pipeline file (pipeline `watch-<name>`). */
function setUp(name: string) {
  const root = path.join(tmp, name, "incoming");
  fs.mkdirSync(root, { recursive: true });
  const pipelinePath = path.join(tmp, name, "watch.yaml");
  const pipelineText = (description = "") =>
    `name: watch-${name}\n${description ? `description: ${description}\n` : ""}survey: test-site\nfieldData: ./incoming\nsteps:\n  - step: test-list-files\n`;
  fs.writeFileSync(pipelinePath, pipelineText());
  const folderIds = () =>
    new Set(
      db
        .select()
        .from(watchedFolders)
        .all()
        .filter((f) => f.folderPath.startsWith(root + path.sep))
        .map((f) => f.id),
    );
  return {
    root,
    pipelinePath,
    pipelineText,
    runsSoFar: () => listRuns(db, { pipelineName: `watch-${name}`, pageSize: 100 }).rows,
    /** Watch events of this test's folders with this event name. */
    events: (event: string) => {
      const ids = folderIds();
      return db
        .select()
        .from(watchEvents)
        .all()
        .filter((e) => ids.has(e.folderId) && e.event === event);
    },
    startWatcher: (): FolderWatcher => watchFieldFolders(db, { root, pipelinePath, quietMs: 300, writeFinishMs: 300, actor }),
  };
}

/** Copies a two-file folder in and waits until the watcher's run of it succeeded. */
async function firstRun(t: ReturnType<typeof setUp>, watcher: FolderWatcher, folderName = "day-1") {
  const folder = path.join(t.root, folderName);
  fs.mkdirSync(folder);
  fs.writeFileSync(path.join(folder, "shot-1.dat"), Buffer.alloc(1000, 1));
  fs.writeFileSync(path.join(folder, "shot-2.dat"), Buffer.alloc(500, 7));
  await until(() => t.runsSoFar().some((r) => r.status === "succeeded"));
  await watcher.idle();
  return folder;
}

describe("watched folders", () => {
  it("runs a copied-in folder once its files are complete, and only once for the same content", async () => {
    const t = setUp("complete");
    const watcher = t.startWatcher();
    await watcher.ready;
    const folder = path.join(t.root, "day-1");
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
    await until(() => t.runsSoFar().some((r) => r.status === "succeeded"));
    await watcher.idle();
    const [run] = t.runsSoFar();
    expect(run.door).toBe("watcher");
    const report = readArtifactSync(getRun(db, run.id)!.steps[0].outputs.report) as { data: Array<{ name: string; size: number }> };
    expect(report.data).toEqual([
      { name: "shot-1.dat", size: 5000 },
      { name: "shot-2.dat", size: 500 },
    ]);
    await until(() => t.events("ignored").some((e) => e.file === "shot-9.dat.part"));

    // The same content copied again into another folder runs once only.
    const again = path.join(t.root, "day-1-copy");
    fs.cpSync(folder, again, { recursive: true });
    await until(() => t.events("run-skipped").length > 0);
    await watcher.idle();
    expect(t.runsSoFar()).toHaveLength(1);
    await watcher.close();
  });

  it("a restarted watcher does not redo folders it already processed, but runs changed ones", async () => {
    const t = setUp("restart");
    const first = t.startWatcher();
    await first.ready;
    const folder = await firstRun(t, first);
    await first.close();
    const skippedBefore = t.events("run-skipped").length;

    const watcher = t.startWatcher();
    await watcher.ready;
    // The restarted watcher looks at day-1 again and records that it skipped it.
    await until(() => t.events("run-skipped").length > skippedBefore);
    await watcher.idle();
    expect(t.runsSoFar()).toHaveLength(1);
    fs.writeFileSync(path.join(folder, "shot-3.dat"), Buffer.alloc(300, 1));
    await until(() => t.runsSoFar().length === 2 && t.runsSoFar()[0].status === "succeeded");
    await watcher.idle();
    await watcher.close();
    expect(getRun(db, t.runsSoFar()[0].id)!.datasetFolder).toBe(folder);
  });

  it("runs the same folders again when the pipeline changes, and refuses a broken pipeline at start", async () => {
    const t = setUp("changed");
    const first = t.startWatcher();
    await first.ready;
    await firstRun(t, first);
    await first.close();
    fs.writeFileSync(t.pipelinePath, t.pipelineText("changed"));
    const startedBefore = t.events("run-started").length;

    const watcher = t.startWatcher();
    await watcher.ready;
    await until(() => t.events("run-started").length > startedBefore && t.runsSoFar().every((r) => r.status === "succeeded"));
    await watcher.idle();
    await watcher.close();
    // The one folder runs once more, for the new pipeline version.
    expect(t.runsSoFar()).toHaveLength(2);
    expect(t.runsSoFar()[0].pipelineVersion).toBe(2);
    expect(t.events("run-started")).toHaveLength(startedBefore + 1);

    fs.writeFileSync(t.pipelinePath, `name: watch-changed\nsurvey: test-site\nsteps:\n  - step: no-such-step\n`);
    expect(() => t.startWatcher()).toThrow(/watch\.yaml line 4, steps\[0\]\.step: unknown step "no-such-step"/);
  });
});
