/**
 * The command line end to end, as a processor uses it, on the small engine test steps (no
 * solver): `migrate`, `run` to success (exit 0) and to a failed run (exit 1), `export` writing
 * SEG-Y, CSV and JSON, `cancel` and `resume` of a running run, and `watch` on a folder.
 * Exit codes are our own contract (cli/execute.ts: 0 succeeded, 1 any other outcome); the
 * exported files are checked against their standards where one applies.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { pathToFileURL } from "node:url";
import { execa, type ResultPromise } from "execa";
import { afterAll, beforeAll, describe, expect, it, onTestFinished } from "vitest";

let tmp: string;
const cli = path.join(process.cwd(), "tests", "fixtures", "engine", "cli.ts");
// The tsx loader by file URL: the commands run with the temporary folder as working directory.
const tsx = pathToFileURL(path.join(process.cwd(), "node_modules", "tsx", "dist", "loader.mjs")).href;
const env = () => ({ ...process.env, TRACEWRIGHT_DATA_DIR: path.join(tmp, "data"), TRACEWRIGHT_USER: "" });
/** The tracewright command line with the engine test steps registered. */
const tw = (args: string[]) => execa(process.execPath, ["--import", tsx, cli, ...args], { env: env(), reject: false, cwd: tmp });
const twBackground = (args: string[]): ResultPromise => execa(process.execPath, ["--import", tsx, cli, ...args], { env: env(), reject: false, cwd: tmp });

/** Waits for a condition the command line brings about (no fixed sleeps). */
async function until(cond: () => boolean | Promise<boolean>, what: string, limitMs = 60_000) {
  const end = Date.now() + limitMs;
  while (!(await cond())) {
    if (Date.now() > end) throw new Error(`gave up waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 50));
  }
}

function writePipeline(name: string, steps: string, extra = ""): string {
  const file = path.join(tmp, `${name}.yaml`);
  fs.writeFileSync(file, `name: ${name}\nsurvey: test-site\n${extra}steps:\n${steps}`);
  return file;
}

interface RunJson {
  runId: number;
  status: string;
  error: string | null;
  steps: Array<{ label: string; status: string; cacheHit: boolean; outputs: Record<string, string> }>;
}

/** Runs a pipeline with --json and returns the exit code and the outcome. */
async function runPipeline(file: string) {
  const r = await tw(["run", file, "--json"]);
  return { exitCode: r.exitCode, stderr: r.stderr, outcome: JSON.parse(r.stdout) as RunJson };
}

const GOOD = `  - step: test-make-traces
    settings: { traces: 3, samples: 5, value: 0.25 }
  - step: test-scale
    settings: { factor: -4 }
  - step: test-make-model
    settings: { nx: 3, nz: 2, spacingM: 0.5, topRows: 1 }
  - step: test-read-label
    settings: { label: "line 7 (north)" }
`;

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-cli-e2e-"));
});
afterAll(() => fs.rmSync(tmp, { recursive: true, force: true }));

describe("tracewright command line end to end", { timeout: 240_000 }, () => {
  it("migrate creates the database and says where", async () => {
    const r = await tw(["migrate"]);
    expect(r.exitCode, r.stderr).toBe(0);
    const m = /database ready at (.+)$/m.exec(r.stdout);
    expect(m).not.toBeNull();
    expect(m![1].startsWith(path.join(tmp, "data"))).toBe(true);
    expect(fs.statSync(m![1]).size).toBeGreaterThan(0);
    // Run again on an existing database: still exit 0 (nothing to apply).
    expect((await tw(["migrate"])).exitCode).toBe(0);
  });

  it("run exits 0 when every step succeeds, 1 when a step fails", async () => {
    const ok = await runPipeline(writePipeline("cli-good", GOOD));
    expect(ok.exitCode, ok.stderr).toBe(0);
    expect(ok.outcome.status).toBe("succeeded");
    expect(ok.outcome.steps.map((s) => s.status)).toEqual(["succeeded", "succeeded", "succeeded", "succeeded"]);

    const bad = await runPipeline(writePipeline("cli-bad", `  - step: test-make-traces\n  - step: test-fail\n`));
    expect(bad.exitCode).toBe(1);
    expect(bad.outcome.status).toBe("failed");
    expect(bad.outcome.error).toMatch(/the traces are not what this step expects \(test\)/);
    expect(bad.outcome.steps.map((s) => s.status)).toEqual(["succeeded", "failed"]);
  });

  it("export writes gathers as SEG-Y rev 2.0, a model as CSV and a report as JSON", async () => {
    const { outcome } = await runPipeline(writePipeline("cli-export", GOOD));
    expect(outcome.status).toBe("succeeded");
    const id = String(outcome.runId);

    // SEG-Y: checked byte by byte against SEG-Y rev 2.0 (SEG Technical Standards Committee 2017,
    // "SEG-Y_r2.0 Data Exchange Format", sections 3-5; byte positions from the standard's tables,
    // from memory): 3200-byte textual header, 400-byte binary header, 240-byte trace headers,
    // big-endian by default.
    const sgy = path.join(tmp, "out.sgy");
    const e1 = await tw(["export", id, "--step", "test-scale", "--out", sgy]);
    expect(e1.exitCode, e1.stderr).toBe(0);
    const bytes = fs.readFileSync(sgy);
    const v = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
    const ns = 5;
    expect(bytes.length).toBe(3200 + 400 + 3 * (240 + 4 * ns));
    // Textual header in EBCDIC (IBM code page 037: "C" = 0xC3, " " = 0x40, "1" = 0xF1).
    expect([bytes[0], bytes[1], bytes[2]]).toEqual([0xc3, 0x40, 0xf1]);
    const bin = (pos: number) => 3200 + pos - 3201; // standard byte position -> file offset
    expect(v.getUint16(bin(3217))).toBe(1000); // sample interval, µs (the test traces: 1 ms)
    expect(v.getUint16(bin(3221))).toBe(ns); // samples per data trace
    expect(v.getUint16(bin(3225))).toBe(5); // format 5: 4-byte IEEE floating point
    expect(v.getUint16(bin(3255))).toBe(1); // measurement system 1: metres
    expect(v.getUint32(bin(3297))).toBe(0x01020304); // byte-order constant 16909060 read big-endian
    expect([bytes[bin(3501)], bytes[bin(3502)]]).toEqual([2, 0]); // revision 2.0
    expect(v.getUint16(bin(3503))).toBe(1); // fixed-length traces
    for (let t = 0; t < 3; t++) {
      const at = 3600 + t * (240 + 4 * ns);
      expect(v.getInt32(at + 12)).toBe(t + 1); // bytes 13-16: channel number
      expect(v.getUint16(at + 114)).toBe(ns); // bytes 115-116: samples in this trace
      expect(v.getUint16(at + 116)).toBe(1000); // bytes 117-118: sample interval, µs
      // Samples: 0.25 scaled by -4 is exactly -1 in IEEE binary32.
      for (let k = 0; k < ns; k++) expect(v.getFloat32(at + 240 + 4 * k)).toBe(-1);
    }

    // CSV: RFC 4180 rows (comma-separated, one header line), one row per cell, x fastest.
    const csv = path.join(tmp, "model.csv");
    const e2 = await tw(["export", id, "--step", "test-make-model", "--out", csv]);
    expect(e2.exitCode, e2.stderr).toBe(0);
    const rows = fs.readFileSync(csv, "utf8").trimEnd().split("\n").map((l) => l.split(","));
    expect(rows[0]).toEqual(["x_m", "z_m", "vp_m_per_s", "vs_m_per_s", "rho_kg_per_m3"]);
    expect(rows.slice(1).map((r) => r.map(Number))).toEqual([
      [0, 0, 500, 250, 1800],
      [0.5, 0, 500, 250, 1800],
      [1, 0, 500, 250, 1800],
      [0, 0.5, 1500, 600, 2000],
      [0.5, 0.5, 1500, 600, 2000],
      [1, 0.5, 1500, 600, 2000],
    ]);

    // JSON: parses as RFC 8259 JSON and holds the report the step wrote.
    const json = path.join(tmp, "label.json");
    const e3 = await tw(["export", id, "--step", "test-read-label", "--out", json]);
    expect(e3.exitCode, e3.stderr).toBe(0);
    expect(JSON.parse(fs.readFileSync(json, "utf8"))).toEqual({ kind: "json", role: "label", data: "line 7 (north)" });

    // An existing file is kept unless --force.
    const again = await tw(["export", id, "--step", "test-read-label", "--out", json]);
    expect(again.exitCode).toBe(2);
    expect(again.stderr).toMatch(/exists; pass --force to replace it/);
  });

  it("cancel stops a running run (exit 1, cancelled) and resume finishes it from its first unfinished step", async () => {
    const started = path.join(tmp, "wait-started");
    const release = path.join(tmp, "wait-release");
    const file = writePipeline(
      "cli-cancel",
      `  - step: test-make-traces\n  - step: test-wait\n    settings: { ms: 600000, startedFlagFile: ${JSON.stringify(started)}, releaseFile: ${JSON.stringify(release)} }\n`,
    );
    const running = twBackground(["run", file, "--json"]);
    onTestFinished(() => {
      if (running.exitCode === null) running.kill("SIGKILL");
    });
    await until(() => fs.existsSync(started), "the wait step to start");
    const list = JSON.parse((await tw(["runs", "--json", "--status", "running"])).stdout) as { runs: Array<{ id: number; pipeline: string }> };
    const run = list.runs.find((r) => r.pipeline === "cli-cancel");
    expect(run).not.toBeUndefined();

    const cancel = await tw(["cancel", String(run!.id)]);
    expect(cancel.exitCode, cancel.stderr).toBe(0);
    expect(cancel.stderr).toMatch(new RegExp(`cancel requested for run ${run!.id}`));
    const done = await running;
    expect(done.exitCode).toBe(1);
    const cancelled = JSON.parse(String(done.stdout)) as RunJson;
    expect(cancelled.status).toBe("cancelled");
    expect(cancelled.steps.map((s) => s.status)).toEqual(["succeeded", "cancelled"]);

    fs.writeFileSync(release, "go");
    fs.rmSync(started);
    const resumed = await tw(["resume", String(run!.id), "--json"]);
    expect(resumed.exitCode, resumed.stderr).toBe(0);
    const outcome = JSON.parse(resumed.stdout) as RunJson;
    expect(outcome.status).toBe("succeeded");
    expect(outcome.steps.map((s) => s.status)).toEqual(["succeeded", "succeeded"]);
    // The wait step ran again (it touched its flag file); the first step was not redone.
    expect(fs.existsSync(started)).toBe(true);
    expect(outcome.steps[0].outputs).toEqual(cancelled.steps[0].outputs);
  });

  it("watch runs the pipeline on a folder copied in, and stops cleanly on SIGTERM", async () => {
    const root = path.join(tmp, "incoming");
    fs.mkdirSync(root);
    const file = writePipeline("cli-watch", `  - step: test-list-files\n`, "fieldData: ./incoming\n");
    const watcher = twBackground(["watch", root, "--pipeline", file, "--quiet-seconds", "0.3"]);
    onTestFinished(() => {
      if (watcher.exitCode === null) watcher.kill("SIGKILL");
    });
    let stderr = "";
    watcher.stderr!.on("data", (d: Buffer) => (stderr += d.toString()));
    await until(() => stderr.includes(`watching ${root}`), "the watcher to start");
    const folder = path.join(root, "day-1");
    fs.mkdirSync(folder);
    fs.writeFileSync(path.join(folder, "shot-1.dat"), Buffer.alloc(700, 3));
    await until(() => /run \d+ (succeeded|failed|cancelled)/.test(stderr), "the watcher's run to finish");
    expect(stderr).toMatch(/run (\d+) succeeded/);
    const id = /run (\d+) succeeded/.exec(stderr)![1];
    watcher.kill("SIGTERM");
    const ended = await watcher;
    expect(ended.exitCode).toBe(0);
    const json = path.join(tmp, "files.json");
    expect((await tw(["export", id, "--step", "test-list-files", "--out", json])).exitCode).toBe(0);
    expect(JSON.parse(fs.readFileSync(json, "utf8")).data).toEqual([{ name: "shot-1.dat", size: 700 }]);
  });
});
