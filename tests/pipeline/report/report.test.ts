/**
 * The client report end to end on a small approved run (synthetic SH shots over a slow block,
 * a uniform starting model, a two-stage waveform inversion through the real runner), checked
 * with Debian's poppler-utils as an outside reader of the PDF (pdftoppm renders every page,
 * pdftotext reads the text back):
 * - the report is refused until a lead approves the run;
 * - the PDF renders page by page, and its text holds the survey name, the Vs range of both
 *   models (computed here from the stored models, not by the report code), the cautions and, on
 *   its last page, the fingerprint;
 * - the stored artifact holds the same bytes and its file hashes to its name (SHA-256, FIPS 180-4,
 *   computed with node:crypto); the audit trail records "report.create";
 * - the interpretation is versioned: a second save is version 2 and the report prints it.
 * Also the PNG encoder the model sections use: the CRC-32 check value of "123456789" is
 * 0xCBF43926 (the catalogue value for CRC-32/ISO-HDLC, which PNG uses: PNG specification annex D)
 * and png-js (the decoder pdfkit itself uses, a general-purpose library) reads the pixels back.
 */
import crypto from "node:crypto";
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { pathToFileURL } from "node:url";
import { execa } from "execa";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import PNG from "png-js";
import { closeDb, getDb, type Db } from "@/db/client";
import { seedDemoUsers } from "@/db/seed";
import { getUserByEmail } from "@/db/queries/users";
import { addReview } from "@/db/queries/reviews";
import { saveInterpretation, latestInterpretation } from "@/db/queries/interpretations";
import { listRunReports } from "@/db/queries/reports";
import { searchAudit } from "@/db/queries/audit-search";
import { getRun } from "@/db/queries/runs";
import { readArtifactSync, artifactFilePath } from "@/pipeline/artifact-store";
import { createReport, readStoredReport } from "@/pipeline/report/create";
import { crc32, encodePngRgb } from "@/pipeline/report/png";
import { INVERTED_MODEL_CAUTIONS } from "@/pipeline/report/cautions";
import { fontSafe } from "@/pipeline/report/words";
import type { ElasticModel } from "@/pipeline/types";
import { seededRandom } from "../../helpers/random";
import { runInversionFixture } from "../../helpers/inverted-run";

let tmp: string;
let db: Db;
let runId: number;
let lead: { id: number; name: string; email: string };
let processorEmail: string;

async function pdfText(file: string, page?: number): Promise<string> {
  const range = page ? ["-f", String(page), "-l", String(page)] : [];
  const { stdout } = await execa("pdftotext", [...range, file, "-"]);
  return stdout.replace(/\s+/g, " ");
}

beforeAll(async () => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-report-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  db = getDb();
  const accounts = seedDemoUsers(db);
  const u = getUserByEmail(db, accounts.find((a) => a.role === "lead")!.email)!;
  lead = { id: u.id, name: u.name, email: u.email };
  processorEmail = accounts.find((a) => a.role === "processor")!.email;
  runId = await runInversionFixture(db, tmp);
}, 240_000);

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

const actor = () => ({ userId: lead.id, label: lead.name, door: "cli" as const });

describe("client report", () => {
  it("is refused, and so is an interpretation, until a lead approves the run", async () => {
    await expect(createReport(db, runId, actor())).rejects.toMatchObject({ code: "conflict" });
    expect(() => saveInterpretation(db, { runId, section: "summary", text: "early", authorUserId: lead.id, authorLabel: lead.name })).toThrow(/not approved/);
  });

  it("keeps every saved interpretation as a new version", () => {
    addReview(db, { runId, reviewerUserId: lead.id, decision: "approved", comment: "" });
    const a = saveInterpretation(db, { runId, section: "summary", text: "A slow zone lies under 7 to 10 m.", authorUserId: lead.id, authorLabel: lead.name });
    const same = saveInterpretation(db, { runId, section: "summary", text: "A slow zone lies under 7 to 10 m.  ", authorUserId: lead.id, authorLabel: lead.name });
    const b = saveInterpretation(db, {
      runId,
      section: "summary",
      text: "A slow zone lies between 7 and 10 m along the profile, 1 to 3 m deep.",
      authorUserId: lead.id,
      authorLabel: lead.name,
    });
    expect([a.version, same.version, b.version]).toEqual([1, 1, 2]);
    expect(() => saveInterpretation(db, { runId, section: "nonsense", text: "x", authorUserId: lead.id, authorLabel: lead.name })).toThrow(/not a report section/);
    expect(latestInterpretation(db, runId).map((t) => [t.section, t.version])).toEqual([["summary", 2]]);
  });

  it("writes a PDF that poppler renders page by page, holding the survey, the model figures and the cautions; stores and records it", { timeout: 120_000 }, async () => {
    const report = await createReport(db, runId, actor(), { profilePositionsM: [4, 8.5, 12] });
    const file = path.join(tmp, "report.pdf");
    fs.writeFileSync(file, report.pdf);

    // Every page renders (pdftoppm writes one PNG per page).
    const outDir = path.join(tmp, "pages");
    fs.mkdirSync(outDir);
    await execa("pdftoppm", ["-r", "50", "-png", file, path.join(outDir, "page")]);
    const pngs = fs.readdirSync(outDir).filter((f) => f.endsWith(".png"));
    expect(pngs.length).toBe(report.pages);
    expect(report.pages).toBeGreaterThanOrEqual(6);
    const { stdout: info } = await execa("pdfinfo", [file]);
    expect(info).toMatch(new RegExp(`Pages:\\s+${report.pages}\\b`));

    const text = await pdfText(file);
    const run = getRun(db, runId)!;
    expect(text).toContain(run.surveyName!);
    expect(text).toContain("Profile BF-2");
    // The Vs range of each model, computed here from the stored artifacts.
    const inversion = run.steps.find((s) => s.stepId === "waveform-inversion")!;
    for (const hash of [inversion.inputs.model, inversion.outputs.model]) {
      const m = readArtifactSync(hash) as ElasticModel;
      const vs = Array.from(m.vs);
      expect(text).toContain(`Vs from ${Math.round(Math.min(...vs))} m/s to ${Math.round(Math.max(...vs))} m/s`);
    }
    for (const caution of INVERTED_MODEL_CAUTIONS) expect(text).toContain(caution);
    expect(text).toContain("A slow zone lies between 7 and 10 m along the profile, 1 to 3 m deep.");
    expect(text).toContain("version 2");
    expect(text).toContain("m/s");
    // Every artifact hash of the run is in the appendix.
    for (const s of run.steps) for (const hash of Object.values(s.outputs)) expect(text).toContain(hash);
    // The fingerprint on the last page.
    expect(await pdfText(file, report.pages)).toContain(report.fingerprint);

    // Stored as an artifact: the file hashes to its name and holds these bytes.
    const stored = readStoredReport(report.hash);
    expect(Buffer.from(stored.pdf).equals(Buffer.from(report.pdf))).toBe(true);
    expect(stored.fingerprint).toBe(report.fingerprint);
    expect(crypto.createHash("sha256").update(fs.readFileSync(artifactFilePath(report.hash))).digest("hex")).toBe(report.hash);
    expect(listRunReports(db, runId).map((r) => [r.hash, r.pages])).toEqual([[report.hash, report.pages]]);
    expect(searchAudit(db, { action: "report.create" }).rows.map((e) => e.entityId)).toEqual([String(runId)]);
  });

  it("tracewright report writes the PDF for a lead; refuses a processor and positions that are not numbers", { timeout: 120_000 }, async () => {
    const tsx = pathToFileURL(path.join(process.cwd(), "node_modules", "tsx", "dist", "loader.mjs")).href;
    const cli = path.join(process.cwd(), "cli", "index.ts");
    const tw = (args: string[]) => execa(process.execPath, ["--import", tsx, cli, ...args], { env: { ...process.env, TRACEWRIGHT_DATA_DIR: tmp }, reject: false });
    const out = path.join(tmp, "cli-report.pdf");
    const made = await tw(["report", String(runId), "--out", out, "--as", lead.email, "--positions", "5,9", "--json"]);
    expect(made.exitCode, made.stderr).toBe(0);
    const body = JSON.parse(made.stdout) as { pages: number; hash: string; file: string };
    expect(body.file).toBe(out);
    expect(fs.readFileSync(out).subarray(0, 5).toString("latin1")).toBe("%PDF-");
    const { stdout: info } = await execa("pdfinfo", [out]);
    expect(info).toMatch(new RegExp(`Pages:\\s+${body.pages}\\b`));
    expect(await pdfText(out)).toContain("Vs with depth at the positions chosen: 5 m, 9 m.");

    const refused = await tw(["report", String(runId), "--out", path.join(tmp, "other.pdf"), "--as", processorEmail]);
    expect(refused.exitCode).not.toBe(0);
    expect(refused.stderr).toContain("may not make client reports");
    const bad = await tw(["report", String(runId), "--out", path.join(tmp, "bad.pdf"), "--as", lead.email, "--positions", "ten"]);
    expect(bad.exitCode).toBe(2);
    expect(bad.stderr).toContain("--positions ten");
    expect(fs.existsSync(path.join(tmp, "bad.pdf"))).toBe(false);
  });

  it("refuses depth profiles outside the model and shots the inversion did not use, naming the choice", async () => {
    await expect(createReport(db, runId, actor(), { profilePositionsM: [40] })).rejects.toMatchObject({ code: "bad-input", message: expect.stringContaining("40 m") });
    await expect(createReport(db, runId, actor(), { fitShots: ["SP9"] })).rejects.toMatchObject({ code: "bad-input", message: expect.stringContaining("SP9") });
  });
});

describe("text for the shipped fonts", () => {
  it("spells out the symbols the Latin subset lacks and keeps what it holds", () => {
    // The subset's coverage: @fontsource "latin" (Latin-1, general punctuation, a few signs).
    expect(fontSafe("\u03b5 \u2265 0.5, \u03c1 in kg/m\u00b3 \u2013 caf\u00e9 \u2022 \u4e2d")).toBe("epsilon >= 0.5, rho in kg/m\u00b3 \u2013 caf\u00e9 \u2022 ?");
  });
});

describe("PNG encoder of the model sections", () => {
  it("computes the CRC-32 check value of the catalogue", () => {
    expect(crc32(new TextEncoder().encode("123456789"))).toBe(0xcbf43926);
  });

  it("round-trips random RGB pixels through png-js", async () => {
    const rnd = seededRandom(14);
    const w = 13;
    const hgt = 7;
    const rgb = Uint8Array.from({ length: w * hgt * 3 }, () => Math.floor(rnd.uniform() * 256));
    const png = new PNG(Buffer.from(encodePngRgb(w, hgt, rgb)));
    expect([png.width, png.height]).toEqual([w, hgt]);
    const rgba: Buffer = await new Promise((resolve) => png.decode((pixels: Buffer) => resolve(pixels)));
    const back = Uint8Array.from({ length: w * hgt * 3 }, (_, i) => rgba[Math.floor(i / 3) * 4 + (i % 3)]);
    expect(Array.from(back)).toEqual(Array.from(rgb));
  });

  it("rejects a raster of the wrong length, naming the parameter", () => {
    expect(() => encodePngRgb(2, 2, new Uint8Array(11))).toThrow(/rgb must hold/);
  });
});
