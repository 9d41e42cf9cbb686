"use server";

/**
 * Survey and profile records from the control room: create and change a survey, add and change
 * its profiles, put people on it. Each action checks "surveys.edit" itself (auditors are refused)
 * and the queries record the change in the audit trail in the same transaction. Inputs are
 * checked with the schemas the forms and the command line use (db/survey-fields.ts).
 */
import { revalidatePath } from "next/cache";
import { getDb } from "@/db/client";
import { addProfile, createSurvey, setSurveyPerson, updateProfile, updateSurvey } from "@/db/queries/surveys";
import { getUserByEmail } from "@/db/queries/users";
import { newSurvey, profileFields, surveyDetails, surveyPerson, surveySlug } from "@/db/survey-fields";
import { AppError } from "@/pipeline/errors";
import { requirePermission, webActor } from "../session";
import { errorState, type FormState } from "./form-state";

const text = (form: FormData, name: string) => {
  const v = form.get(name);
  return typeof v === "string" ? v : undefined;
};

/** A number field: empty → null, else the number (NaN is refused by the schema with the field named). */
const num = (form: FormData, name: string) => {
  const v = text(form, name);
  return v === undefined || v.trim() === "" ? null : Number(v);
};

const detailsOf = (form: FormData) => ({
  name: text(form, "name") ?? "",
  client: text(form, "client"),
  site: text(form, "site"),
  purpose: text(form, "purpose"),
  startDate: text(form, "startDate"),
  endDate: text(form, "endDate"),
  notes: text(form, "notes"),
});

const profileOf = (form: FormData) => ({
  name: text(form, "name") ?? "",
  description: text(form, "description"),
  orientationDeg: num(form, "orientationDeg"),
  spreadDescription: text(form, "spreadDescription"),
  crs: text(form, "crs"),
  startX: num(form, "startX"),
  startY: num(form, "startY"),
  endX: num(form, "endX"),
  endY: num(form, "endY"),
});

/** Creates a survey (short name + details). */
export async function addSurvey(_prev: FormState, form: FormData): Promise<FormState> {
  try {
    const user = await requirePermission("surveys.edit");
    const input = newSurvey.parse({ slug: text(form, "slug") ?? "", ...detailsOf(form) });
    const created = createSurvey(getDb(), input, webActor(user));
    revalidatePath("/surveys");
    return { ok: `Survey ${created.name} created.`, redirectTo: `/surveys/${created.slug}` };
  } catch (err) {
    return errorState(err);
  }
}

/** Changes a survey's details (the short name stays: pipeline files name it). */
export async function editSurvey(_prev: FormState, form: FormData): Promise<FormState> {
  try {
    const user = await requirePermission("surveys.edit");
    const slug = surveySlug.parse(text(form, "slug") ?? "");
    const input = surveyDetails.parse(detailsOf(form));
    updateSurvey(getDb(), slug, input, webActor(user));
    revalidatePath(`/surveys/${slug}`);
    return { ok: "Survey saved." };
  } catch (err) {
    return errorState(err);
  }
}

/** Adds a profile (line) to a survey. */
export async function addSurveyProfile(_prev: FormState, form: FormData): Promise<FormState> {
  try {
    const user = await requirePermission("surveys.edit");
    const slug = surveySlug.parse(text(form, "survey") ?? "");
    const input = profileFields.parse(profileOf(form));
    const created = addProfile(getDb(), slug, input, webActor(user));
    revalidatePath(`/surveys/${slug}`);
    return { ok: `Profile ${created.name} added.`, redirectTo: `/surveys/${slug}/profiles/${encodeURIComponent(created.name)}` };
  } catch (err) {
    return errorState(err);
  }
}

/** Changes a profile's fields (not its line name). */
export async function editSurveyProfile(_prev: FormState, form: FormData): Promise<FormState> {
  try {
    const user = await requirePermission("surveys.edit");
    const slug = surveySlug.parse(text(form, "survey") ?? "");
    const { name, ...fields } = profileFields.parse(profileOf(form));
    updateProfile(getDb(), slug, name, fields, webActor(user));
    revalidatePath(`/surveys/${slug}/profiles/${encodeURIComponent(name)}`);
    return { ok: "Profile saved." };
  } catch (err) {
    return errorState(err);
  }
}

/** Puts a user (by e-mail) on a survey with a role there, or changes that role. */
export async function putPersonOnSurvey(_prev: FormState, form: FormData): Promise<FormState> {
  try {
    const user = await requirePermission("surveys.edit");
    const slug = surveySlug.parse(text(form, "survey") ?? "");
    const input = surveyPerson.parse({ email: text(form, "email") ?? "", role: text(form, "role") ?? "" });
    const db = getDb();
    const person = getUserByEmail(db, input.email);
    if (!person) throw new AppError("not-found", `No user with the e-mail ${input.email} (see People).`, { field: "email" });
    setSurveyPerson(db, slug, person.id, input.role, webActor(user));
    revalidatePath(`/surveys/${slug}`);
    return { ok: `${person.name} is on the survey as ${input.role}.` };
  } catch (err) {
    return errorState(err);
  }
}

