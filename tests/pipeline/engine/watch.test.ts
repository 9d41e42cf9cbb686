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
function setUp(name: string, extra: { geometryTable?: string; quietMs?: number; settleMs?: number } = {}) {
  const root = path.join(tmp, name, "incoming");
  fs.mkdirSync(root, { recursive: true });
  const pipelinePath = path.join(tmp, name, "watch.yaml");
  if (extra.geometryTable) fs.writeFileSync(path.join(tmp, name, "geometry.csv"), extra.geometryTable);
  const pipelineText = (description = "") =>
    `name: watch-${name}\n${description ? `description: ${description}\n` : ""}survey: test-site\nfieldData: ./incoming\n${extra.geometryTable ? "geometryTable: ./geometry.csv\n" : ""}steps:\n  - step: test-list-files\n`;
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
    startWatcher: (): FolderWatcher =>
      watchFieldFolders(db, { root, pipelinePath, quietMs: extra.quietMs ?? 300, settleMs: extra.settleMs, writeFinishMs: 300, actor }),
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

  it("a slow copy runs once, when every file its geometry table names is there, never on a partial folder", async () => {
    const table = "file,source_point,blow,source_x_m,first_channel_x_m,channel_spacing_m,channel_count\n" +
      ["shot-1.dat", "shot-2.dat", "shot-3.dat"].map((f, i) => `${f},${i + 1},1,${i},0,1,4`).join("\n") + "\n";
    // The quiet period is far longer than the test: only completeness can start the run.
    const t = setUp("slow-copy", { geometryTable: table, quietMs: 600_000, settleMs: 300 });
    const watcher = t.startWatcher();
    await watcher.ready;
    const folder = path.join(t.root, "day-1");
    fs.mkdirSync(folder);
    for (const f of ["shot-1.dat", "shot-2.dat"]) {
      fs.writeFileSync(path.join(folder, f), Buffer.alloc(400, 1));
      // Wait until the watcher has seen the file (a watch event would need a run; the write-finish
      // detection takes writeFinishMs), then longer than the settle time: no run may start.
      await new Promise((r) => setTimeout(r, 1200));
      expect(t.runsSoFar()).toHaveLength(0);
    }
    fs.writeFileSync(path.join(folder, "shot-3.dat"), Buffer.alloc(400, 1));
    await until(() => t.runsSoFar().some((r) => r.status === "succeeded"));
    await watcher.idle();
    await watcher.close();
    const runs = t.runsSoFar();
    expect(runs).toHaveLength(1);
    const report = readArtifactSync(getRun(db, runs[0].id)!.steps[0].outputs.report) as { data: Array<{ name: string }> };
    expect(report.data.map((f) => f.name).filter((n) => n.endsWith(".dat"))).toEqual(["shot-1.dat", "shot-2.dat", "shot-3.dat"]);
  });

  it("a folder with a READY marker runs without waiting for the quiet period", async () => {
    const t = setUp("marker", { quietMs: 600_000, settleMs: 300 });
    const watcher = t.startWatcher();
    await watcher.ready;
    const folder = path.join(t.root, "day-1");
    fs.mkdirSync(folder);
    fs.writeFileSync(path.join(folder, "shot-1.dat"), Buffer.alloc(400, 1));
    fs.writeFileSync(path.join(folder, "READY"), "");
    await until(() => t.runsSoFar().some((r) => r.status === "succeeded"));
    await watcher.idle();
    await watcher.close();
    expect(t.runsSoFar()).toHaveLength(1);
  });

  it("a run of a folder that then changes is recorded as superseded by the new run", async () => {
    const t = setUp("supersede");
    const watcher = t.startWatcher();
    await watcher.ready;
    const folder = await firstRun(t, watcher);
    const [first] = t.runsSoFar();
    fs.writeFileSync(path.join(folder, "shot-3.dat"), Buffer.alloc(300, 1));
    await until(() => t.events("superseded").length === 1 && t.runsSoFar().every((r) => r.status === "succeeded"));
    await watcher.idle();
    await watcher.close();
    const [second] = t.runsSoFar();
    const [event] = t.events("superseded");
    expect(event.runId).toBe(first.id);
    expect(event.reason).toBe(`run ${first.id} saw this folder before it changed; superseded by run ${second.id}`);
  });
});
