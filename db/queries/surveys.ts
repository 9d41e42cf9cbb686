/** Surveys and their profiles. */
import { and, eq } from "drizzle-orm";
import { writeTransaction, type Db } from "../client";
import { profiles, surveys } from "../schema";

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

/** Updates the descriptive fields of a survey. */
export function describeSurvey(db: Db, slug: string, info: { name?: string; site?: string; client?: string; description?: string }) {
  db.update(surveys).set(info).where(eq(surveys.slug, slug)).run();
}

export function listSurveys(db: Db) {
  return db.select().from(surveys).orderBy(surveys.name).all();
}
