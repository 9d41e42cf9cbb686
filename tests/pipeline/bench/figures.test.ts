/**
 * The counting behind the concurrency and load figures (scripts/concurrency-figure.ts,
 * scripts/load-figure.ts): the loggers' ledger against step_logs, busy errors as better-sqlite3
 * reports them, nearest-rank percentiles, /proc/cpuinfo and Set-Cookie parsing.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import Database from "better-sqlite3";
import { eq } from "drizzle-orm";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../../db/client";
import { stepLogs } from "../../../db/schema";
import { getStepLogs } from "../../../db/queries/runs";
import { busyLines, compareLedger, parseLedger, type StoredLogLine } from "../../../pipeline/bench/concurrency";
import { percentile, summariseLatency } from "../../../pipeline/bench/latency";
import { parseCpuInfo } from "../../../pipeline/bench/machine";
import { createRunLogger } from "../../../pipeline/logger";
import { createRun, executeRun } from "../../../pipeline/runner";
import { cookiePairs } from "../../../scripts/http-session";
import { registerEngineTestSteps } from "../../helpers/engine-steps";
import { mulberry32 } from "../../helpers/random";

const actor = { userId: null, label: "tester", door: "cli" as const };
let tmp: string;
let ledgerDir: string;
let db: Db;

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-figures-"));
  ledgerDir = path.join(tmp, "ledger");
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  registerEngineTestSteps();
  db = getDb();
});

afterAll(() => {
  delete process.env.TRACEWRIGHT_LOG_LEDGER;
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

const readLedger = () => parseLedger(fs.readdirSync(ledgerDir).map((f) => fs.readFileSync(path.join(ledgerDir, f), "utf8")).join(""));
const stored = (runId: number): StoredLogLine[] =>
  getStepLogs(db, { runId, limit: 5000 }).map((l) => ({ runId: l.runId, runStepId: l.runStepId, at: l.at.getTime(), level: l.level, message: l.message }));

describe("log-line ledger", () => {
  it("lists every line a run logged, and the comparison finds a line deleted from step_logs", async () => {
    process.env.TRACEWRIGHT_LOG_LEDGER = ledgerDir;
    const file = path.join(tmp, "ledger.yaml");
    fs.writeFileSync(
      file,
      "name: ledger-check\nsurvey: test-site\nsteps:\n  - step: test-make-traces\n    settings: { traces: 4, samples: 16, value: 1 }\n  - step: test-scale\n    settings: { factor: 3 }\n",
    );
    const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor });
    expect((await executeRun(db, runId)).status).toBe("succeeded");
    delete process.env.TRACEWRIGHT_LOG_LEDGER;

    const { lines, unreadable } = readLedger();
    expect(unreadable).toBe(0);
    const ofRun = lines.filter((l) => l.runId === runId);
    // The runner logs the start and the end of every step at least; each line is in step_logs once.
    expect(ofRun.length).toBeGreaterThanOrEqual(2);
    expect(ofRun.length).toBe(stored(runId).length);
    expect(compareLedger(ofRun, stored(runId))).toMatchObject({ emitted: ofRun.length, insertFailed: 0, missing: 0, runs: 1 });

    const first = getStepLogs(db, { runId, limit: 1 })[0];
    db.delete(stepLogs).where(eq(stepLogs.id, first.id)).run();
    const after = compareLedger(ofRun, stored(runId));
    expect(after.missing).toBe(1);
    expect(after.missingExamples[0]).toMatchObject({ runId, message: first.message, at: first.at.getTime() });
  });

  it("marks a line whose insert failed (no such run: the foreign key refuses it)", () => {
    process.env.TRACEWRIGHT_LOG_LEDGER = ledgerDir;
    createRunLogger(db, 987_654, null).info("a line for a run that does not exist");
    delete process.env.TRACEWRIGHT_LOG_LEDGER;
    const line = readLedger().lines.find((l) => l.runId === 987_654)!;
    expect(line).toMatchObject({ recorded: false, pid: process.pid, level: "info", message: "a line for a run that does not exist" });
    expect(compareLedger([line], stored(987_654))).toMatchObject({ emitted: 1, insertFailed: 1, missing: 1 });
  });

  it("matches lines as multisets: two equal lines need two stored rows; stored lines of other runs are ignored", () => {
    const l = { pid: 1, runId: 5, runStepId: 9, at: 1000, level: "info", message: "same", recorded: true };
    const row = { runId: 5, runStepId: 9, at: 1000, level: "info", message: "same" };
    expect(compareLedger([l, l], [row]).missing).toBe(1);
    expect(compareLedger([l, l], [row, row, { ...row, runId: 6 }]).missing).toBe(0);
    expect(compareLedger([l], [{ ...row, runStepId: null }]).missing).toBe(1);
    expect(parseLedger(`${JSON.stringify(l)}\nnot json\n{"runId":"x"}\n\n`)).toEqual({ lines: [l], unreadable: 2 });
  });
});

describe("busy errors", () => {
  it("recognises what better-sqlite3 throws when another connection holds the write lock", () => {
    // SQLite result code SQLITE_BUSY (5), message "database is locked" (sqlite.org/rescode.html#busy):
    // the second connection waits 0 ms, so the write fails at once while the first holds BEGIN IMMEDIATE.
    const file = path.join(tmp, "busy.db");
    const a = new Database(file);
    const b = new Database(file);
    a.pragma("journal_mode = WAL");
    a.exec("create table t (x integer)");
    b.pragma("busy_timeout = 0");
    a.exec("begin immediate");
    a.exec("insert into t values (1)");
    let thrown: (Error & { code?: string }) | undefined;
    try {
      b.exec("insert into t values (2)");
    } catch (err) {
      thrown = err as Error & { code?: string };
    }
    a.exec("commit");
    a.close();
    b.close();
    expect(thrown?.code).toBe("SQLITE_BUSY");
    const printed = `run 12 failed: ${String(thrown)}\nrun 13 succeeded\nstep busy-wait done\n{"code":"${thrown?.code}"}`;
    expect(busyLines(printed)).toEqual([`run 12 failed: ${String(thrown)}`, `{"code":"SQLITE_BUSY"}`]);
  });
});

describe("nearest-rank percentiles", () => {
  it("gives the worked examples of the nearest-rank method", () => {
    // Worked examples of the nearest-rank method (Wikipedia, "Percentile"; from memory), the
    // inverse empirical distribution function of Hyndman & Fan (1996), definition 1.
    const a = [15, 20, 35, 40, 50];
    expect([5, 30, 40, 50, 100].map((p) => percentile(a, p))).toEqual([15, 20, 20, 35, 50]);
    const b = [3, 6, 7, 8, 8, 10, 13, 15, 16, 20];
    expect([25, 50, 75, 100].map((p) => percentile(b, p))).toEqual([7, 8, 15, 20]);
  });

  it("is the smallest value with at least p % of the values at or below it, in any order", () => {
    const rand = mulberry32(20261202);
    const values = Array.from({ length: 1001 }, () => Math.round(rand() * 5000));
    for (const p of [50, 95, 99]) {
      const q = percentile(values, p);
      const atOrBelow = values.filter((v) => v <= q).length;
      const below = values.filter((v) => v < q).length;
      expect(atOrBelow / values.length).toBeGreaterThanOrEqual(p / 100);
      expect(below / values.length).toBeLessThan(p / 100);
    }
    expect(summariseLatency([4, 1, 3, 2])).toEqual({ requests: 4, p50Ms: 2, p95Ms: 4, p99Ms: 4, maxMs: 4, meanMs: 2.5 });
    expect(summariseLatency([]).p95Ms).toBeNaN();
    expect(() => percentile([1], 0)).toThrow(RangeError);
  });
});

describe("machine description", () => {
  it("reads the model and the vector flags of x86 and arm64 /proc/cpuinfo", () => {
    // Field names as the Linux kernel prints them: arch/x86/kernel/cpu/proc.c ("model name", "flags"),
    // arch/arm64/kernel/cpuinfo.c ("Features", no model name).
    const x86 = "processor\t: 0\nvendor_id\t: AuthenticAMD\nmodel name\t: AMD EPYC 7B13\nflags\t\t: fpu vme sse sse2 ht syscall nx mmx ssse3 fma cx16 sse4_1 sse4_2 avx f16c avx2 avx512f avx512bw\n\nprocessor\t: 1\n";
    expect(parseCpuInfo(x86)).toEqual({ model: "AMD EPYC 7B13", vectorFlags: ["sse", "sse2", "ssse3", "fma", "sse4_1", "sse4_2", "avx", "f16c", "avx2", "avx512f", "avx512bw"] });
    const arm = "processor\t: 0\nBogoMIPS\t: 50.00\nFeatures\t: fp asimd evtstrm aes pmull sha1 sha2 crc32 atomics fphp asimdhp cpuid asimdrdm sve\nCPU part\t: 0xd0c\n";
    expect(parseCpuInfo(arm)).toEqual({ model: "0xd0c", vectorFlags: ["asimd", "asimdhp", "asimdrdm", "sve"] });
    expect(parseCpuInfo("")).toEqual({ model: "", vectorFlags: [] });
  });
});

describe("session cookies", () => {
  it("keeps name=value of each Set-Cookie line, later ones replacing earlier ones", () => {
    // RFC 6265 section 3.1, the examples' Set-Cookie lines.
    const jar = cookiePairs(["SID=31d4d96e407aad42; Path=/; Secure; HttpOnly", "lang=en-US; Path=/; Domain=example.com"]);
    expect([...jar]).toEqual([
      ["SID", "31d4d96e407aad42"],
      ["lang", "en-US"],
    ]);
    cookiePairs(["lang=; Expires=Sun, 06 Nov 1994 08:49:37 GMT"], jar);
    expect(jar.get("lang")).toBe("");
  });
});
