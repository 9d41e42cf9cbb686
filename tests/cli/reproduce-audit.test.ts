/**
 * `tracewright reproduce` and `tracewright audit verify` from the command line, on the small
 * engine test steps: exit codes (0 identical or intact, 1 different or broken; our own contract,
 * README command reference), the JSON report, and a row edited directly in SQLite named by id.
 * The chain construction itself is tested in tests/db/audit-chain.test.ts.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { pathToFileURL } from "node:url";
import Database from "better-sqlite3";
import { execa } from "execa";
import { afterAll, beforeAll, describe, expect, it } from "vitest";

let tmp: string;
const cli = path.join(process.cwd(), "tests", "fixtures", "engine", "cli.ts");
const tsx = pathToFileURL(path.join(process.cwd(), "node_modules", "tsx", "dist", "loader.mjs")).href;
const env = () => ({ ...process.env, TRACEWRIGHT_DATA_DIR: path.join(tmp, "data"), TRACEWRIGHT_USER: "" });
const tw = (args: string[]) => execa(process.execPath, ["--import", tsx, cli, ...args], { env: env(), reject: false, cwd: tmp });

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-cli-reproduce-"));
});
afterAll(() => fs.rmSync(tmp, { recursive: true, force: true }));

describe("reproduce and audit verify on the command line", { timeout: 180_000 }, () => {
  it("reproduces a run identically, then finds a changed stored artifact (exit 1)", async () => {
    const file = path.join(tmp, "small.yaml");
    fs.writeFileSync(file, `name: small\nsurvey: test-site\nsteps:\n  - step: test-make-traces\n    settings: { traces: 4, samples: 16, value: 0.5 }\n  - step: test-scale\n    settings: { factor: 3 }\n`);
    const ran = await tw(["run", file, "--json"]);
    expect(ran.exitCode, ran.stderr).toBe(0);
    const { runId, steps } = JSON.parse(ran.stdout) as { runId: number; steps: Array<{ outputs: Record<string, string> }> };

    const same = await tw(["reproduce", String(runId), "--json"]);
    expect(same.exitCode, same.stderr).toBe(0);
    const report = JSON.parse(same.stdout) as { verdict: string; steps: Array<{ artifacts: Array<{ name: string; reproducedHash: string }> }> };
    expect(report.verdict).toBe("identical");
    expect(report.steps[1].artifacts[0].reproducedHash).toBe(steps[1].outputs.gathers);

    // Overwrite the stored result of the scale step with another artifact's bytes.
    const store = (h: string) => path.join(tmp, "data", "artifacts", h.slice(0, 2), `${h}.twa`);
    fs.copyFileSync(store(steps[0].outputs.gathers), store(steps[1].outputs.gathers));
    const changed = await tw(["reproduce", String(runId)]);
    // Stored 0.5 (the first step's samples) against reproduced 1.5: |Δ| = 1 over a peak of 0.5.
    expect(changed.exitCode).toBe(1);
    expect(changed.stdout).toMatch(/DIFFERENT/);
    expect(changed.stdout).toMatch(/output gathers: different max relative difference 2.00e\+0 \(absolute 1.00e\+0\) at gathers\[0\].data; the stored file was changed after the run/);
  });

  it("audit verify passes, then names the event edited directly in SQLite (exit 1)", async () => {
    const ok = await tw(["audit", "verify", "--json"]);
    expect(ok.exitCode, ok.stderr).toBe(0);
    const verdict = JSON.parse(ok.stdout) as { ok: boolean; checked: number; headId: number; headHash: string };
    expect(verdict.ok).toBe(true);
    // run.start, pipeline.version, two reproductions requested and decided
    expect(verdict.checked).toBeGreaterThanOrEqual(6);

    const s = new Database(path.join(tmp, "data", "tracewright.db"));
    const target = s.prepare("select id from audit_events where action = 'run.reproduce.verdict' order by id limit 1").get() as { id: number };
    s.prepare("update audit_events set after_json = replace(after_json, 'identical', 'different') where id = ?").run(target.id);
    s.close();
    const broken = await tw(["audit", "verify"]);
    expect(broken.exitCode).toBe(1);
    expect(broken.stdout).toContain(`BROKEN at event ${target.id}`);

    const kept = await tw(["audit", "verify", "--expect-head", `${verdict.headId}:${"0".repeat(64)}`]);
    expect(kept.exitCode).toBe(1);
    const bad = await tw(["audit", "verify", "--expect-head", "nonsense"]);
    expect(bad.exitCode).toBe(2);
  });
});
