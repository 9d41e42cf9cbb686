/**
 * Surveys, their profiles and the people on them: records with pages and a command. Pipeline
 * files still name a survey and a profile by name; `ensureSurvey` creates what does not exist
 * yet, so it shows up in the browser like one made there. Every change from a person is recorded
 * in the audit trail in the same transaction.
 */
import { and, asc, desc, eq, inArray, like, or, sql } from "drizzle-orm";
import { writeTransaction, type Db } from "../client";
import { RecordError } from "../errors";
import { datasets, pipelines, pipelineVersions, profiles, reviews, runSteps, runs, surveyPeople, surveys, users, type SurveyRole } from "../schema";
import type { ProfileFields, SurveyDetails } from "../survey-fields";
import { recordAudit, type Actor } from "./audit";

export type SurveyRecord = typeof surveys.$inferSelect;
export type ProfileRecord = typeof profiles.$inferSelect;

/** Finds or creates the survey with this slug (and the profile, when named). */
export function ensureSurvey(db: Db, slug: string, profileName: string | null, info: { name?: string; site?: string; client?: string } = {}) {
  return writeTransaction(db, (tx) => ensureSurveyIn(tx, slug, profileName, info));
}

function ensureSurveyIn(db: Db, slug: string, profileName: string | null, info: { name?: string; site?: string; client?: string }) {
  let survey = db.select().from(surveys).where(eq(surveys.slug, slug)).get();
  if (!survey) {
    survey = db
      .insert(surveys)
      .values({ slug, name: info.name ?? slug, site: info.site ?? "", client: info.client ?? "" })
      .returning()
      .get();
  }
  let profile = null;
  if (profileName) {
    profile = db.select().from(profiles).where(and(eq(profiles.surveyId, survey.id), eq(profiles.name, profileName))).get() ?? null;
    profile ??= db.insert(profiles).values({ surveyId: survey.id, name: profileName }).returning().get();
  }
  return { survey, profile };
}

/** Updates the descriptive fields of a survey (no audit: for scripts that set up data). */
export function describeSurvey(db: Db, slug: string, info: Partial<SurveyDetails> & { description?: string }) {
  db.update(surveys).set(info).where(eq(surveys.slug, slug)).run();
}

/** A survey in the list: its record and counts. */
export interface SurveyListRow extends SurveyRecord {
  profileCount: number;
  runCount: number;
}

/** Surveys by name; `search` matches slug, name, client, site and purpose (case-insensitive). */
export function listSurveys(db: Db, search = ""): SurveyListRow[] {
  const q = search.trim();
  const pattern = `%${q.replace(/[\\%_]/g, (c) => `\\${c}`)}%`;
  const match = q
    ? or(
        sql`${surveys.slug} like ${pattern} escape '\\'`,
        sql`${surveys.name} like ${pattern} escape '\\'`,
        sql`${surveys.client} like ${pattern} escape '\\'`,
        sql`${surveys.site} like ${pattern} escape '\\'`,
        sql`${surveys.purpose} like ${pattern} escape '\\'`,
      )
    : undefined;
  return db
    .select({
      survey: surveys,
      profileCount: sql<number>`(select count(*) from profiles p where p.survey_id = "surveys"."id")`,
      runCount: sql<number>`(select count(*) from runs r join datasets d on d.id = r.dataset_id where d.survey_id = "surveys"."id")`,
    })
    .from(surveys)
    .where(match)
    .orderBy(asc(surveys.name))
    .all()
    .map((r) => ({ ...r.survey, profileCount: Number(r.profileCount), runCount: Number(r.runCount) }));
}

/** The survey with this slug, or null. */
export function getSurveyBySlug(db: Db, slug: string): SurveyRecord | null {
  return db.select().from(surveys).where(eq(surveys.slug, slug)).get() ?? null;
}

function requireSurvey(db: Db, slug: string): SurveyRecord {
  const s = getSurveyBySlug(db, slug);
  if (!s) throw new RecordError("not-found", `No survey "${slug}" (see the surveys list).`, "slug");
  return s;
}

/** Creates a survey; RecordError "conflict" when the short name is taken. */
export function createSurvey(db: Db, input: SurveyDetails & { slug: string }, actor: Actor): SurveyRecord {
  return writeTransaction(db, (tx) => {
    if (getSurveyBySlug(tx, input.slug)) throw new RecordError("conflict", `A survey named "${input.slug}" exists already.`, "slug");
    const created = tx.insert(surveys).values(input).returning().get();
    recordAudit(tx, { actor, action: "survey.create", entityType: "survey", entityId: created.slug, after: input });
    return created;
  });
}

/** Changes a survey's details; the audit event holds the fields before and after. */
export function updateSurvey(db: Db, slug: string, changes: Partial<SurveyDetails>, actor: Actor): SurveyRecord {
  return writeTransaction(db, (tx) => {
    const before = requireSurvey(tx, slug);
    const keys = Object.keys(changes) as Array<keyof SurveyDetails>;
    const changed = keys.filter((k) => changes[k] !== undefined && changes[k] !== before[k]);
    if (changed.length === 0) return before;
    const set = Object.fromEntries(changed.map((k) => [k, changes[k]]));
    const after = tx.update(surveys).set(set).where(eq(surveys.id, before.id)).returning().get();
    recordAudit(tx, {
      actor,
      action: "survey.update",
      entityType: "survey",
      entityId: slug,
      before: Object.fromEntries(changed.map((k) => [k, before[k]])),
      after: set,
    });
    return after;
  });
}

/** The profiles of a survey by name. */
export function listProfiles(db: Db, surveyId: number): ProfileRecord[] {
  return db.select().from(profiles).where(eq(profiles.surveyId, surveyId)).orderBy(asc(profiles.name)).all();
}

/** One profile of a survey by line name, or null. */
export function getProfile(db: Db, surveyId: number, name: string): ProfileRecord | null {
  return db.select().from(profiles).where(and(eq(profiles.surveyId, surveyId), eq(profiles.name, name))).get() ?? null;
}

/** Adds a profile to a survey; RecordError "conflict" when the line name is taken on it. */
export function addProfile(db: Db, slug: string, input: ProfileFields, actor: Actor): ProfileRecord {
  return writeTransaction(db, (tx) => {
    const survey = requireSurvey(tx, slug);
    if (getProfile(tx, survey.id, input.name)) throw new RecordError("conflict", `Survey "${slug}" has a profile "${input.name}" already.`, "name");
    const created = tx
      .insert(profiles)
      .values({ ...input, surveyId: survey.id })
      .returning()
      .get();
    recordAudit(tx, { actor, action: "profile.add", entityType: "profile", entityId: `${slug}/${created.name}`, after: input });
    return created;
  });
}

/** Changes a profile's fields (the line name stays: pipeline files name it). */
export function updateProfile(db: Db, slug: string, name: string, input: Omit<ProfileFields, "name">, actor: Actor): ProfileRecord {
  return writeTransaction(db, (tx) => {
    const survey = requireSurvey(tx, slug);
    const before = getProfile(tx, survey.id, name);
    if (!before) throw new RecordError("not-found", `Survey "${slug}" has no profile "${name}".`, "name");
    const keys = Object.keys(input) as Array<keyof typeof input>;
    const changed = keys.filter((k) => input[k] !== before[k]);
    if (changed.length === 0) return before;
    const set = Object.fromEntries(changed.map((k) => [k, input[k]]));
    const after = tx.update(profiles).set(set).where(eq(profiles.id, before.id)).returning().get();
    recordAudit(tx, {
      actor,
      action: "profile.update",
      entityType: "profile",
      entityId: `${slug}/${name}`,
      before: Object.fromEntries(changed.map((k) => [k, before[k]])),
      after: set,
    });
    return after;
  });
}

/** Someone on a survey. */
export interface SurveyPersonRow {
  userId: number;
  name: string;
  email: string;
  active: boolean;
  role: SurveyRole;
}

/** The people on a survey, leads first, then by name. */
export function listSurveyPeople(db: Db, surveyId: number): SurveyPersonRow[] {
  return db
    .select({ userId: users.id, name: users.name, email: users.email, active: users.active, role: surveyPeople.role })
    .from(surveyPeople)
    .innerJoin(users, eq(users.id, surveyPeople.userId))
    .where(eq(surveyPeople.surveyId, surveyId))
    .orderBy(sql`case ${surveyPeople.role} when 'lead' then 0 else 1 end`, asc(users.name))
    .all();
}

/** Puts a user on a survey with a role, or changes their role there. */
export function setSurveyPerson(db: Db, slug: string, userId: number, role: SurveyRole, actor: Actor): void {
  writeTransaction(db, (tx) => {
    const survey = requireSurvey(tx, slug);
    const user = tx.select({ id: users.id, email: users.email }).from(users).where(eq(users.id, userId)).get();
    if (!user) throw new RecordError("not-found", `No user with id ${userId}.`, "email");
    const before = tx
      .select({ role: surveyPeople.role })
      .from(surveyPeople)
      .where(and(eq(surveyPeople.surveyId, survey.id), eq(surveyPeople.userId, userId)))
      .get();
    if (before?.role === role) return;
    tx.insert(surveyPeople)
      .values({ surveyId: survey.id, userId, role })
      .onConflictDoUpdate({ target: [surveyPeople.surveyId, surveyPeople.userId], set: { role } })
      .run();
    recordAudit(tx, {
      actor,
      action: "survey.person",
      entityType: "survey",
      entityId: slug,
      before: before ? { email: user.email, role: before.role } : undefined,
      after: { email: user.email, role },
    });
  });
}

/** A dataset of a survey, with its profile's name. */
export interface SurveyDatasetRow {
  id: number;
  name: string;
  profileName: string | null;
  fileCount: number;
  totalBytes: number;
  createdAt: Date;
}

/** A run of a survey as its page lists it. */
export interface SurveyRunRow {
  id: number;
  status: string;
  pipelineName: string;
  profileName: string | null;
  startedByLabel: string;
  createdAt: Date;
  review: "approved" | "returned" | null;
}

/** The latest approved run of a profile that built a model, with the model's artifact. */
export interface ApprovedModel {
  runId: number;
  stepLabel: string;
  artifactHash: string;
  approvedAt: Date;
  reviewer: string;
}

/** A survey's page: its record, people, profiles (each with its latest approved model), datasets and runs. */
export interface SurveyDetail {
  survey: SurveyRecord;
  people: SurveyPersonRow[];
  profiles: Array<ProfileRecord & { latestApprovedModel: ApprovedModel | null }>;
  datasets: SurveyDatasetRow[];
  runs: SurveyRunRow[];
}

/** Everything a survey's page shows; null when there is no such survey. `runLimit` caps the runs listed (newest first). */
export function getSurveyDetail(db: Db, slug: string, runLimit = 50): SurveyDetail | null {
  const survey = getSurveyBySlug(db, slug);
  if (!survey) return null;
  const profileRows = listProfiles(db, survey.id);
  const datasetRows = db
    .select({
      id: datasets.id,
      name: datasets.name,
      profileName: profiles.name,
      fileCount: datasets.fileCount,
      totalBytes: datasets.totalBytes,
      createdAt: datasets.createdAt,
    })
    .from(datasets)
    .leftJoin(profiles, eq(profiles.id, datasets.profileId))
    .where(eq(datasets.surveyId, survey.id))
    .orderBy(desc(datasets.id))
    .all();
  const runRows = surveyRuns(db, survey.id, null, runLimit);
  const approved = latestApprovedModels(db, survey.id);
  return {
    survey,
    people: listSurveyPeople(db, survey.id),
    profiles: profileRows.map((p) => ({ ...p, latestApprovedModel: approved.get(p.id) ?? null })),
    datasets: datasetRows,
    runs: runRows,
  };
}

/** Runs of a survey (or of one profile of it), newest first, with their latest review decision. */
export function surveyRuns(db: Db, surveyId: number, profileId: number | null, limit = 50): SurveyRunRow[] {
  const rows = db
    .select({
      id: runs.id,
      status: runs.status,
      pipelineName: pipelines.name,
      profileName: profiles.name,
      startedByLabel: runs.startedByLabel,
      createdAt: runs.createdAt,
    })
    .from(runs)
    .innerJoin(datasets, eq(datasets.id, runs.datasetId))
    .innerJoin(pipelineVersions, eq(pipelineVersions.id, runs.pipelineVersionId))
    .innerJoin(pipelines, eq(pipelines.id, pipelineVersions.pipelineId))
    .leftJoin(profiles, eq(profiles.id, datasets.profileId))
    .where(profileId === null ? eq(datasets.surveyId, surveyId) : and(eq(datasets.surveyId, surveyId), eq(datasets.profileId, profileId)))
    .orderBy(desc(runs.id))
    .limit(limit)
    .all();
  const decisions = latestDecisionByRun(
    db,
    rows.map((r) => r.id),
  );
  return rows.map((r) => ({ ...r, review: decisions.get(r.id)?.decision ?? null }));
}

function latestDecisionByRun(db: Db, runIds: number[]) {
  const out = new Map<number, { decision: "approved" | "returned"; at: Date; reviewer: string }>();
  if (runIds.length === 0) return out;
  const rows = db
    .select({ runId: reviews.runId, decision: reviews.decision, at: reviews.at, reviewer: users.name })
    .from(reviews)
    .innerJoin(users, eq(users.id, reviews.reviewerUserId))
    .where(inArray(reviews.runId, runIds))
    .orderBy(asc(reviews.id))
    .all();
  for (const r of rows) out.set(r.runId, r);
  return out;
}

/**
 * Per profile of a survey, the newest run whose latest review is an approval and which wrote a
 * model (the last step with a `model` output: the inverted model of an inversion pipeline, else
 * the built starting model).
 */
export function latestApprovedModels(db: Db, surveyId: number): Map<number, ApprovedModel> {
  const candidates = db
    .select({ runId: runs.id, profileId: datasets.profileId })
    .from(runs)
    .innerJoin(datasets, eq(datasets.id, runs.datasetId))
    .where(and(eq(datasets.surveyId, surveyId), eq(runs.status, "succeeded"), sql`${datasets.profileId} is not null`))
    .orderBy(desc(runs.id))
    .all();
  const decisions = latestDecisionByRun(
    db,
    candidates.map((c) => c.runId),
  );
  const out = new Map<number, ApprovedModel>();
  for (const c of candidates) {
    const profileId = c.profileId!;
    if (out.has(profileId)) continue;
    const d = decisions.get(c.runId);
    if (d?.decision !== "approved") continue;
    const steps = db
      .select({ label: runSteps.label, outputsJson: runSteps.outputsJson })
      .from(runSteps)
      .where(and(eq(runSteps.runId, c.runId), like(runSteps.outputsJson, '%"model"%')))
      .orderBy(desc(runSteps.position))
      .all();
    for (const s of steps) {
      const hash = (JSON.parse(s.outputsJson) as Record<string, string>).model;
      if (hash) {
        out.set(profileId, { runId: c.runId, stepLabel: s.label, artifactHash: hash, approvedAt: d.at, reviewer: d.reviewer });
        break;
      }
    }
  }
  return out;
}

/** The leads of a survey who can be mailed (active accounts). */
export function surveyLeads(db: Db, surveyId: number): Array<{ userId: number; name: string; email: string }> {
  return listSurveyPeople(db, surveyId)
    .filter((p) => p.role === "lead" && p.active)
    .map((p) => ({ userId: p.userId, name: p.name, email: p.email }));
}
