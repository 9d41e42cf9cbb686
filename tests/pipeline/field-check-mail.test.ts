/**
 * The field lead's mail: sent through a local SMTP catcher (smtp-server, as the invitation tests
 * do) when a field check finds something that needs a reshoot, with every such finding in the
 * body; not sent when nothing does, nor without an SMTP host.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, afterEach, beforeAll, describe, expect, it } from "vitest";
import { startCatcher, type CaughtMail } from "../helpers/mail-catcher";
import { closeDb, getDb } from "../../db/client";
import { fieldCheckMail, fieldCheckOfRun, sendFieldCheckMail } from "../../pipeline/field-check-mail";
import { executeRun } from "../../pipeline/runner";
import { createRun } from "../../pipeline/run-create";
import { registerEngineTestSteps } from "../helpers/engine-steps";
import { checkFieldShots, type FieldShot } from "../../pipeline/kernels/field-check-verdicts";
import { fieldCheckParams, type FieldCheckReport } from "../../pipeline/steps/field-check";
import { gaussianSource, mulberry32 } from "../helpers/random";

let messages: CaughtMail[] = [];
let port = 0;
let close: () => Promise<void>;

beforeAll(async () => {
  ({ port, messages, close } = await startCatcher());
});

afterAll(() => close());
afterEach(() => {
  delete process.env.TRACEWRIGHT_SMTP_HOST;
  delete process.env.TRACEWRIGHT_SMTP_PORT;
});

/** Eight records of twelve channels of noise and a pulse; channel 5 dead in every record when `dead`. */
function report(dead: boolean): FieldCheckReport {
  const gauss = gaussianSource(mulberry32(21));
  const ns = 1200;
  const dt = 0.00025;
  const shots: FieldShot[] = Array.from({ length: 8 }, (_, i) => {
    const data = new Float32Array(12 * ns);
    for (let t = 0; t < 12; t++) {
      if (dead && t === 4) continue;
      const r = Math.abs(t - 5.5);
      for (let k = 0; k < ns; k++) {
        const s = k * dt - 0.01 - r / 200;
        data[t * ns + k] = Math.exp(-((s / 0.004) ** 2)) + 0.001 * gauss();
      }
    }
    return {
      id: `sp${i + 1}`,
      file: `sp${i + 1}.sg2`,
      sourcePoint: i + 1,
      blow: 1,
      sourceX: 100 + 10 * i,
      sampleIntervalS: dt,
      startTimeS: -0.01,
      sampleCount: ns,
      channel: Array.from({ length: 12 }, (_, c) => c + 1),
      receiverX: Array.from({ length: 12 }, (_, c) => c),
      data,
    };
  });
  const settings = fieldCheckParams.parse({});
  return { ...checkFieldShots(shots, settings), settings };
}

describe("the field lead's mail", () => {
  it("is mailed when a channel is dead, naming it, and says what to do", async () => {
    process.env.TRACEWRIGHT_SMTP_HOST = "127.0.0.1";
    process.env.TRACEWRIGHT_SMTP_PORT = String(port);
    const r = report(true);
    expect(r.findings.map((f) => f.kind)).toEqual(["dead-channel"]);
    const outcome = await sendFieldCheckMail({ to: "rosa@corvell.example", report: r, folder: "/incoming/qm1-day1", runId: 7, pageUrl: "http://127.0.0.1:3000/field-checks/3" });
    expect(outcome).toEqual({ sent: true, subject: "Field check qm1-day1: 1 finding needs action before the crew leaves" });
    expect(messages).toHaveLength(1);
    expect(messages[0].to).toEqual(["rosa@corvell.example"]);
    const body = messages[0].raw.replace(/=\r?\n/g, "");
    expect(body).toContain("Channel 5 is dead in 8 of 8 records");
    expect(body).toContain("run 7, 8 records");
    expect(body).toContain("http://127.0.0.1:3000/field-checks/3");
  });

  it("is not written when nothing needs a reshoot, and not sent without an SMTP host", async () => {
    const clean = report(false);
    expect(clean.findings).toEqual([]);
    expect(fieldCheckMail({ report: clean, folder: "/incoming/a", runId: 1 })).toBeNull();
    expect(await sendFieldCheckMail({ to: "rosa@corvell.example", report: clean, folder: "/incoming/a", runId: 1 })).toEqual({ sent: false, reason: "nothing needs a reshoot" });
    const outcome = await sendFieldCheckMail({ to: "rosa@corvell.example", report: report(true), folder: "/incoming/a", runId: 2 });
    expect(outcome).toEqual({ sent: false, reason: "no SMTP server is configured (TRACEWRIGHT_SMTP_HOST)" });
  });

  it("reads the report of a run the watcher finished, and nothing for a run without a field check", async () => {
    const tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-field-mail-"));
    const before = { dir: process.env.TRACEWRIGHT_DATA_DIR, db: process.env.TRACEWRIGHT_DB };
    process.env.TRACEWRIGHT_DATA_DIR = tmp;
    delete process.env.TRACEWRIGHT_DB;
    try {
      registerEngineTestSteps();
      const db = getDb();
      const actor = { userId: null, label: "watcher", door: "watcher" as const };
      const write = (name: string, steps: string) => {
        fs.writeFileSync(path.join(tmp, name), `name: ${name.replace(".yaml", "")}\nsurvey: test-site\nsteps:\n  - step: test-make-traces\n    settings: { traces: 6, samples: 300, value: 1 }\n${steps}`);
        return path.join(tmp, name);
      };
      const checked = createRun(db, { source: "pipeline-file", pipelinePath: write("checked.yaml", "  - step: field-check\n"), actor }).runId;
      await executeRun(db, checked);
      const plain = createRun(db, { source: "pipeline-file", pipelinePath: write("plain.yaml", ""), actor }).runId;
      await executeRun(db, plain);
      const report = fieldCheckOfRun(db, checked)!;
      // Six constant traces: every sample sits at the trace's largest magnitude, so each is clipped throughout.
      expect(report.counts).toMatchObject({ shots: 1, traces: 6 });
      expect(report.findings.filter((f) => f.kind === "clipped").map((f) => f.value)).toEqual([300, 300, 300, 300, 300, 300]);
      expect(fieldCheckOfRun(db, plain)).toBeNull();
    } finally {
      closeDb();
      if (before.dir === undefined) delete process.env.TRACEWRIGHT_DATA_DIR;
      else process.env.TRACEWRIGHT_DATA_DIR = before.dir;
      if (before.db !== undefined) process.env.TRACEWRIGHT_DB = before.db;
      fs.rmSync(tmp, { recursive: true, force: true });
    }
  });
});
