/**
 * Survey and profile records (db/queries/surveys.ts, db/survey-fields.ts): creation and changes
 * are audited with before and after, names are unique, the search matches text literally, and
 * each profile's latest approved model is the newest approved run that wrote a model. The EPSG
 * code form "EPSG:nnnn" follows the EPSG registry's code notation (e.g. EPSG:27700, British
 * National Grid; from memory).
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { closeDb, getDb, type Db } from "../../db/client";
import { listAudit } from "../../db/queries/audit";
import { ensureDataset } from "../../db/queries/datasets";
import { savePipelineVersion } from "../../db/queries/pipelines";
import { addReview } from "../../db/queries/reviews";
import { claimQueuedRun, finishOwnedRun, insertQueuedRun } from "../../db/queries/run-records";
import { addProfile, createSurvey, ensureSurvey, getSurveyDetail, listSurveys, setSurveyPerson, updateProfile, updateSurvey } from "../../db/queries/surveys";
import { createUser } from "../../db/queries/users";
import { runSteps } from "../../db/schema";
import { newSurvey, profileFields } from "../../db/survey-fields";
import { eq } from "drizzle-orm";

let tmp: string;
let db: Db;
const actor = { userId: null, label: "Tam Whitcombe", door: "web" as const };

beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "tw-surveys-"));
  process.env.TRACEWRIGHT_DATA_DIR = tmp;
  delete process.env.TRACEWRIGHT_DB;
  db = getDb();
});

afterAll(() => {
  closeDb();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe("survey fields", () => {
  it("accept EPSG codes as EPSG:nnnn (any case) and refuse other forms, naming the field", () => {
    const base = { name: "QM-1", startX: 0, startY: 0, endX: 47, endY: 0 };
    expect(profileFields.parse({ ...base, crs: "epsg:27700" }).crs).toBe("EPSG:27700");
    expect(profileFields.parse({ ...base, crs: "EPSG:32630" }).crs).toBe("EPSG:32630");
    for (const bad of ["27700", "EPSG 27700", "EPSG:27", "ESRI:102100", "EPSG:27700x"]) {
      const r = profileFields.safeParse({ ...base, crs: bad });
      expect(r.success, bad).toBe(false);
      expect(r.error!.issues[0].path).toEqual(["crs"]);
    }
    // Coordinates need their reference, and come as all four ends or none.
    expect(profileFields.safeParse({ ...base, crs: "" }).error!.issues[0].path).toEqual(["crs"]);
    expect(profileFields.safeParse({ name: "QM-1", startX: 1 }).error!.issues.map((i) => i.path[0]).sort()).toEqual(["endX", "endY", "startY"]);
    expect(profileFields.safeParse({ name: "QM-1", orientationDeg: 360 }).success).toBe(false);
  });

  it("check dates as real calendar days with the end not before the start", () => {
    expect(newSurvey.safeParse({ slug: "a", name: "A", startDate: "2026-11-17", endDate: "2026-11-18" }).success).toBe(true);
    expect(newSurvey.safeParse({ slug: "a", name: "A", startDate: "2026-02-30" }).success).toBe(false);
    expect(newSurvey.safeParse({ slug: "a", name: "A", startDate: "2026-11-18", endDate: "2026-11-17" }).error!.issues[0].path).toEqual(["endDate"]);
    expect(newSurvey.safeParse({ slug: "Has Space", name: "A" }).error!.issues[0].path).toEqual(["slug"]);
  });
});

describe("survey records", () => {
  it("create and change with audit events holding what changed", () => {
    createSurvey(db, newSurvey.parse({ slug: "brennick", name: "Brennick field", client: "Trust" }), actor);
    expect(() => createSurvey(db, newSurvey.parse({ slug: "brennick", name: "Again" }), actor)).toThrow(/exists already/);
    updateSurvey(db, "brennick", { client: "Quillmoor Education Trust", purpose: "Find the hollow" }, actor);
    updateSurvey(db, "brennick", { client: "Quillmoor Education Trust" }, actor); // no change: no event
    const events = listAudit(db, { entityType: "survey", entityId: "brennick" });
    expect(events.map((e) => e.action).sort()).toEqual(["survey.create", "survey.update"]);
    const update = events.find((e) => e.action === "survey.update")!;
    expect(JSON.parse(update.beforeJson!)).toEqual({ client: "Trust", purpose: "" });
    expect(JSON.parse(update.afterJson!)).toEqual({ client: "Quillmoor Education Trust", purpose: "Find the hollow" });
    expect(update.actorLabel).toBe("Tam Whitcombe");

    addProfile(db, "brennick", profileFields.parse({ name: "BR-1", crs: "EPSG:27700", startX: 1, startY: 2, endX: 3, endY: 4 }), actor);
    expect(() => addProfile(db, "brennick", profileFields.parse({ name: "BR-1" }), actor)).toThrow(/already/);
    const { name: _n, ...fields } = profileFields.parse({ name: "BR-1", crs: "EPSG:27700", startX: 1, startY: 2, endX: 3, endY: 5, orientationDeg: 90 });
    updateProfile(db, "brennick", "BR-1", fields, actor);
    const profileEvents = listAudit(db, { entityType: "profile", entityId: "brennick/BR-1" });
    const change = profileEvents.find((e) => e.action === "profile.update")!;
    expect(JSON.parse(change.afterJson!)).toEqual({ endY: 5, orientationDeg: 90 });
  });

  it("search matches name, client and site, with % and _ taken literally", () => {
    createSurvey(db, newSurvey.parse({ slug: "odd", name: "100% coverage_test", site: "Harrow Down" }), actor);
    expect(listSurveys(db, "harrow").map((s) => s.slug)).toEqual(["odd"]);
    expect(listSurveys(db, "education").map((s) => s.slug)).toEqual(["brennick"]);
    expect(listSurveys(db, "100%").map((s) => s.slug)).toEqual(["odd"]);
    expect(listSurveys(db, "0%c")).toEqual([]);
    expect(listSurveys(db, "e_t").map((s) => s.slug)).toEqual(["odd"]);
    expect(listSurveys(db, "").length).toBe(2);
  });

  it("a pipeline naming a new survey and profile creates them, and they are listed like the others", () => {
    ensureSurvey(db, "from-a-file", "FF-1");
    const d = getSurveyDetail(db, "from-a-file")!;
    expect(d.profiles.map((p) => p.name)).toEqual(["FF-1"]);
    expect(listSurveys(db, "from-a-file")).toHaveLength(1);
  });

  it("the latest approved model of a profile: the newest run whose latest review approves it and that wrote a model", () => {
    const lead = createUser(db, { email: "lead@example.org", name: "Rosa", role: "lead", password: "rosa-password-1" });
    setSurveyPerson(db, "brennick", lead.id, "lead", actor);
    const { survey, profile } = ensureSurvey(db, "brennick", "BR-1");
    const { version } = savePipelineVersion(db, { name: "br", surveyId: survey.id, sourceText: "x", sourcePath: null, definition: { steps: [] }, contentHash: "h", actor } as never);
    let n = 0;
    const finished = (model: boolean) => {
      const dataset = ensureDataset(db, { folderPath: "/br", contentHash: `c${++n}`, files: [], surveyId: survey.id, profileId: profile!.id, name: "br" });
      const id = insertQueuedRun(db, {
        pipelineVersionId: version.id,
        datasetId: dataset.id,
        actor,
        steps: [{ label: "build", stepId: "s", stepVersion: 1, paramsJson: "{}" }],
        parentRunId: null,
        rerunFromStep: null,
        overrides: {},
        geometryTableHash: null,
      });
      claimQueuedRun(db, id, 7, new Date());
      db.update(runSteps).set({ status: "succeeded", outputsJson: JSON.stringify(model ? { model: `m${id}` } : { gathers: `g${id}` }) }).where(eq(runSteps.runId, id)).run();
      finishOwnedRun(db, id, 7, { status: "succeeded" });
      return id;
    };
    const approvedOld = finished(true);
    const approvedNoModel = finished(false);
    const approvedThenReturned = finished(true);
    const notReviewed = finished(true);
    for (const id of [approvedOld, approvedNoModel, approvedThenReturned]) addReview(db, { runId: id, reviewerUserId: lead.id, decision: "approved", comment: "" });
    addReview(db, { runId: approvedThenReturned, reviewerUserId: lead.id, decision: "returned", comment: "wrong mute" });
    const d = getSurveyDetail(db, "brennick")!;
    expect(d.profiles[0].latestApprovedModel).toMatchObject({ runId: approvedOld, stepLabel: "build", artifactHash: `m${approvedOld}`, reviewer: "Rosa" });
    expect(d.runs.map((r) => r.id)).toEqual([notReviewed, approvedThenReturned, approvedNoModel, approvedOld]);
    expect(d.runs.map((r) => r.review)).toEqual([null, "returned", "approved", "approved"]);
    expect(d.people).toEqual([{ userId: lead.id, name: "Rosa", email: "lead@example.org", active: true, role: "lead" }]);
  });
});
