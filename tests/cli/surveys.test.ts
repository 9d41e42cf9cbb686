/**
 * `tracewright surveys` as a person uses it: create, add a profile and a person, show as JSON
 * with stable keys; bad input exits 2 with a message naming the option; an auditor is refused.
 * Exit codes and messages are our own contract (DEVELOPERS.md); the EPSG code form "EPSG:nnnn"
 * follows the EPSG registry's notation (from memory).
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { execa } from "execa";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { openDatabase } from "../../db/client";
import { createUser } from "../../db/queries/users";

let tmp: string;
const bin = path.join(process.cwd(), "bin", "tracewright.mjs");
const tw = (args: string[], env: Record<string, string> = {}) =>
  execa(process.execPath, [bin, ...args], {
    env: { ...process.env, TRACEWRIGHT_DATA_DIR: path.join(tmp, "data"), TRACEWRIGHT_DB: path.join(tmp, "data", "tracewright.db"), TRACEWRIGHT_USER: "", ...env },
    reject: false,
    cwd: tmp,
  });

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-cli-surveys-"));
  // The accounts go straight into the database the command line will open.
  const db = openDatabase(path.join(tmp, "data", "tracewright.db"));
  createUser(db, { email: "ines@corvell.example", name: "Ines Varga", role: "admin", password: "a-long-password-1" });
  createUser(db, { email: "tam@corvell.example", name: "Tam Whitcombe", role: "processor", password: "a-long-password-1" });
  createUser(db, { email: "odile@corvell.example", name: "Odile Brasher", role: "auditor", password: "a-long-password-1" });
  db.$client.close();
});

afterAll(() => {
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("tracewright surveys", () => {
  it("creates a survey with a profile and a person, and shows them as JSON", async () => {
    const as = ["--as", "tam@corvell.example"];
    const created = await tw(["surveys", "create", "quillmoor", "--name", "Quillmoor playing field", "--client", "Quillmoor Education Trust", "--start-date", "2026-11-17", ...as]);
    expect(created.stderr).toBe("");
    expect(created.exitCode).toBe(0);
    expect((await tw(["surveys", "add-profile", "quillmoor", "QM-1", "--crs", "epsg:27700", "--start", "412350,287640", "--end", "412395.4,287652.2", "--orientation", "75", ...as])).exitCode).toBe(0);
    expect((await tw(["surveys", "add-person", "quillmoor", "tam@corvell.example", "--role", "lead", ...as])).exitCode).toBe(0);
    const shown = await tw(["surveys", "show", "quillmoor", "--json"]);
    expect(shown.exitCode).toBe(0);
    const body = JSON.parse(shown.stdout);
    expect(body).toMatchObject({ slug: "quillmoor", client: "Quillmoor Education Trust", startDate: "2026-11-17", endDate: "" });
    expect(body.profiles).toEqual([
      { name: "QM-1", orientationDeg: 75, spreadDescription: "", crs: "EPSG:27700", start: [412350, 287640], end: [412395.4, 287652.2], latestApprovedModel: null },
    ]);
    expect(body.people).toEqual([{ email: "tam@corvell.example", name: "Tam Whitcombe", role: "lead" }]);
  }, 240_000);

  it("refuses bad input naming the option, and an auditor's change", async () => {
    const as = ["--as", "tam@corvell.example"];
    const crs = await tw(["surveys", "add-profile", "quillmoor", "QM-2", "--crs", "27700", ...as]);
    expect(crs.exitCode).toBe(2);
    expect(crs.stderr).toMatch(/--crs: expected an EPSG code like "EPSG:27700"/);
    const ends = await tw(["surveys", "add-profile", "quillmoor", "QM-2", "--crs", "EPSG:27700", "--start", "1;2", ...as]);
    expect(ends.exitCode).toBe(2);
    expect(ends.stderr).toMatch(/--start: expected/);
    const missing = await tw(["surveys", "show", "nowhere"]);
    expect(missing.exitCode).toBe(2);
    expect(missing.stderr).toMatch(/No survey "nowhere"/);
    const auditor = await tw(["surveys", "update", "quillmoor", "--notes", "x", "--as", "odile@corvell.example"]);
    expect(auditor.exitCode).toBe(2);
    expect(auditor.stderr).toMatch(/auditor role may not change surveys/);
    expect(auditor.stderr).not.toMatch(/\n\s+at /);
  }, 240_000);
});
