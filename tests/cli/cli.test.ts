/**
 * The command line as a processor uses it: exit codes (0 success, 1 run failed, 2 bad input),
 * --json listings with stable keys, readable errors without stack traces.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { pathToFileURL } from "node:url";
import { execa } from "execa";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { parseOverride } from "../../cli/commands/rerun";

let tmp: string;
const bin = path.join(process.cwd(), "bin", "tracewright.mjs");
const tw = (args: string[], env: Record<string, string> = {}) =>
  execa(process.execPath, [bin, ...args], {
    env: { ...process.env, TRACEWRIGHT_DATA_DIR: path.join(tmp, "data"), TRACEWRIGHT_USER: "", ...env },
    reject: false,
    cwd: tmp,
  });

// The same command line with the small engine test steps registered (tests/fixtures/engine/cli.ts).
const tsx = pathToFileURL(path.join(process.cwd(), "node_modules", "tsx", "dist", "loader.mjs")).href;
const twWithTestSteps = (args: string[]) =>
  execa(process.execPath, ["--import", tsx, path.join(process.cwd(), "tests", "fixtures", "engine", "cli.ts"), ...args], {
    env: { ...process.env, TRACEWRIGHT_DATA_DIR: path.join(tmp, "data-with-runs"), TRACEWRIGHT_USER: "" },
    reject: false,
    cwd: tmp,
  });

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-cli-"));
});
afterAll(() => fs.rmSync(tmp, { recursive: true, force: true }));

describe("tracewright command line", () => {
  it("lists steps with settings, defaults and descriptions as JSON", async () => {
    const r = await tw(["steps", "--json"]);
    expect(r.exitCode).toBe(0);
    const steps = JSON.parse(r.stdout) as Array<{ id: string; settings: Array<{ name: string; description: string }> }>;
    expect(steps.map((s) => s.id)).toContain("import-records");
    for (const s of steps) for (const p of s.settings) expect(p.description, `${s.id}.${p.name}`).not.toBe("");
  });

  it("exits 2 with a located message for a bad pipeline file, and never prints a stack trace", async () => {
    const file = path.join(tmp, "bad.yaml");
    fs.writeFileSync(file, "name: bad-one\nsurvey: s\nsteps:\n  - step: no-such-step\n");
    const r = await tw(["run", file]);
    expect(r.exitCode).toBe(2);
    expect(r.stderr).toMatch(/bad\.yaml line 4, steps\[0\]\.step: unknown step "no-such-step"; valid steps: import-records/);
    expect(r.stderr).not.toMatch(/\n\s+at /);
  });

  it("exits 2 for a missing file, an unknown run and a malformed override", async () => {
    expect((await tw(["run", "nowhere.yaml"])).stderr).toMatch(/Pipeline file nowhere\.yaml cannot be read/);
    const show = await tw(["show", "42"]);
    expect(show.exitCode).toBe(2);
    expect(show.stderr).toMatch(/Run 42 does not exist/);
    const bad = await tw(["rerun", "1", "--from", "x", "--set", "nonsense"]);
    expect(bad.exitCode).toBe(2);
    expect(bad.stderr).toMatch(/--set nonsense: expected <step label>\.<setting>=<value>/);
    const usage = await tw(["runs", "--status", "finished"]);
    expect(usage.exitCode).toBe(2);
  });

  it("adds users and lists them as JSON; refuses a bad role", async () => {
    const add = await tw(["users", "add", "--email", "ada@example.org", "--name", "Ada Test", "--role", "lead", "--password", "long-enough-1"]);
    expect(add.exitCode, add.stderr).toBe(0);
    const list = await tw(["users", "list", "--json"]);
    expect(JSON.parse(list.stdout)).toEqual([{ id: 1, email: "ada@example.org", name: "Ada Test", role: "lead", active: true }]);
    const bad = await tw(["users", "add", "--email", "b@example.org", "--name", "B", "--role", "boss", "--password", "long-enough-1"]);
    expect(bad.exitCode).toBe(2);
    expect(bad.stderr).toMatch(/--role: expected one of admin, lead, processor, auditor/);
  });

  it("export refuses an output folder that does not exist, naming --out", async () => {
    // A real run with a result (in its own database), so the export gets as far as the --out check.
    const file = path.join(tmp, "one-step.yaml");
    fs.writeFileSync(file, "name: one-step\nsurvey: s\nsteps:\n  - step: test-make-traces\n");
    const ran = await twWithTestSteps(["run", file, "--json"]);
    expect(ran.exitCode, ran.stderr).toBe(0);
    const { runId } = JSON.parse(ran.stdout) as { runId: number };
    const missing = path.join(tmp, "no-such-folder");
    const r = await twWithTestSteps(["export", String(runId), "--step", "test-make-traces", "--out", path.join(missing, "x.sgy")]);
    expect(r.exitCode).toBe(2);
    expect(r.stderr).toContain(`--out ${path.join(missing, "x.sgy")}: the folder ${missing} does not exist`);
    expect(fs.existsSync(missing)).toBe(false);
  });

  it("runs list as JSON with stable keys even when empty", async () => {
    const r = await tw(["runs", "--json"]);
    expect(r.exitCode).toBe(0);
    expect(JSON.parse(r.stdout)).toEqual({ total: 0, page: 1, runs: [] });
  });
});

describe("rerun overrides", () => {
  it("parses label.setting=value with YAML values", () => {
    expect(parseOverride("frequency-filter.highCutHz=120", {})).toEqual({ "frequency-filter": { highCutHz: 120 } });
    expect(parseOverride("mute.useTopMute=false", { mute: { a: 1 } })).toEqual({ mute: { a: 1, useTopMute: false } });
    expect(parseOverride("trace-edit.killChannels=[31, 32]", {})).toEqual({ "trace-edit": { killChannels: [31, 32] } });
    expect(() => parseOverride("=3", {})).toThrow(/expected <step label>\.<setting>=<value>/);
    // A dotted path changes one part of a setting that holds an object.
    const twice = parseOverride("build-model.grid.spacingM=0.5", parseOverride("build-model.grid.depthM=30", {}));
    expect(twice).toEqual({ "build-model": { grid: { depthM: 30, spacingM: 0.5 } } });
    // A label that is also a name on Object's prototype stays an ordinary key.
    expect(parseOverride("constructor.x=1", {})).toEqual({ constructor: { x: 1 } });
  });
});

describe("who may manage users from the command line", () => {
  it("refuses --as a non-admin before changing anything, so no user appears without its audit record", async () => {
    await tw(["users", "add", "--email", "odile@example.org", "--name", "Odile Test", "--role", "auditor", "--password", "long-enough-1"]);
    const refused = await tw(["users", "add", "--email", "eve@example.org", "--name", "Eve", "--role", "admin", "--password", "long-enough-1", "--as", "odile@example.org"]);
    expect(refused.exitCode).toBe(2);
    expect(refused.stderr).toMatch(/--as odile@example\.org: a user with the auditor role may not manage users/);
    const list = JSON.parse((await tw(["users", "list", "--json"])).stdout) as Array<{ email: string }>;
    expect(list.map((u) => u.email)).not.toContain("eve@example.org");
  });
});
