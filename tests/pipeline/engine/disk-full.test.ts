/**
 * A full disk, through a fault-injecting artifact store: the write fails with ENOSPC (the POSIX
 * error for "no space left on device", write(2)) after half of the bytes. The run is recorded as
 * failed with "disk full" and where, no temporary file stays behind, the reserve kept free for
 * that moment is released, leftover temporary files of dead processes are cleaned at start-up,
 * and once there is room again the run resumes to success. (Behaviour of our own design.)
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { execa } from "execa";
import { afterAll, afterEach, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../../db/client";
import { getRun } from "../../../db/queries/runs";
import { artifactFiles, artifactsDir, cleanTemporaryArtifacts, DISK_RESERVE_BYTES } from "../../../pipeline/artifact-store";
import { createRun, executeRun, prepareResume } from "../../../pipeline/runner";
import { registerEngineTestSteps } from "../../helpers/engine-steps";

const actor = { userId: null, label: "tester", door: "cli" as const };
let tmp: string;
let db: Db;
const realWrite = artifactFiles.writeFile;

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-disk-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  registerEngineTestSteps();
  db = getDb();
});

afterEach(() => {
  artifactFiles.writeFile = realWrite;
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

function temporaryFiles(): string[] {
  if (!fs.existsSync(artifactsDir())) return [];
  return fs.readdirSync(artifactsDir(), { recursive: true }).map(String).filter((f) => f.endsWith(".tmp"));
}

/** Lets `allowed` artifact writes through, then fails every write after half its bytes, as a full disk does. */
function fillDiskAfter(allowed: number): void {
  let writes = 0;
  artifactFiles.writeFile = (file, bytes) => {
    if (writes++ < allowed) return realWrite(file, bytes);
    fs.writeFileSync(file, bytes.subarray(0, bytes.length >> 1));
    throw Object.assign(new Error(`ENOSPC: no space left on device, write`), { code: "ENOSPC" });
  };
}

describe("a full disk", () => {
  it("fails the run with 'disk full' and where, leaves no temporary file, and resumes once there is room", async () => {
    const file = path.join(tmp, "disk.yaml");
    fs.writeFileSync(
      file,
      `name: disk-full
survey: test-site
steps:
  - step: test-make-traces
    settings: { traces: 4, samples: 64, value: 3 }
  - step: test-scale
    label: scaled
    settings: { factor: 2 }
`,
    );
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    fillDiskAfter(1);
    const outcome = await executeRun(db, runId);
    expect(outcome.status).toBe("failed");
    expect(outcome.error).toMatch(new RegExp(`^scaled: disk full: writing a \\d+-byte artifact to ${artifactsDir().replace(/[.*+?^${}()|[\]\\]/g, "\\$&")} failed`));
    const failed = getRun(db, runId)!;
    expect(failed.status).toBe("failed");
    expect(failed.error).toBe(outcome.error);
    expect(failed.steps.map((s) => s.status)).toEqual(["succeeded", "failed"]);
    expect(temporaryFiles()).toEqual([]);
    // The reserve was given up to record the failure.
    expect(fs.existsSync(path.join(tmp, "disk-reserve"))).toBe(false);

    artifactFiles.writeFile = realWrite;
    prepareResume(db, runId, actor);
    expect((await executeRun(db, runId)).status).toBe("succeeded");
    expect(fs.statSync(path.join(tmp, "disk-reserve")).size).toBe(DISK_RESERVE_BYTES);
  });

  it("temporary artifact files of processes that are gone are deleted at start-up; a live process's are kept", async () => {
    const dir = path.join(artifactsDir(), "ab");
    fs.mkdirSync(dir, { recursive: true });
    const gone = await execa(process.execPath, ["-e", "process.stdout.write(String(process.pid))"]);
    const hash = "ab".padEnd(64, "0");
    const dead = path.join(dir, `${hash}.twa.${gone.stdout}.1700000000000.tmp`);
    const live = path.join(dir, `${hash}.twa.${process.pid}.1700000000000.tmp`);
    fs.writeFileSync(dead, "partial");
    fs.writeFileSync(live, "partial");
    expect(cleanTemporaryArtifacts()).toEqual([dead]);
    expect(fs.existsSync(dead)).toBe(false);
    expect(fs.existsSync(live)).toBe(true);
    fs.rmSync(live);
  });
});
