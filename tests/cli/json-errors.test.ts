/**
 * With --json a failing command prints its error as JSON on stdout (for scripts), besides the
 * message on stderr, and exits with the error's code (2 for a run that does not exist). Our own
 * specification (README, "Command reference").
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { execa } from "execa";
import { afterAll, beforeAll, describe, expect, it } from "vitest";

let tmp: string;
beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-cli-json-"));
});
afterAll(() => fs.rmSync(tmp, { recursive: true, force: true }));

describe("errors with --json", () => {
  it("come as JSON on stdout with code and message, and the exit code stays 2", async () => {
    const r = await execa(process.execPath, [path.join(process.cwd(), "bin", "tracewright.mjs"), "show", "4242", "--json"], {
      env: { ...process.env, TRACEWRIGHT_DATA_DIR: path.join(tmp, "data") },
      reject: false,
      cwd: tmp,
    });
    expect(r.exitCode).toBe(2);
    expect(JSON.parse(r.stdout)).toEqual({ error: { code: "not-found", message: "Run 4242 does not exist (see tracewright runs)" } });
    expect(r.stderr).toContain("tracewright: Run 4242 does not exist");
  }, 60_000);
});
