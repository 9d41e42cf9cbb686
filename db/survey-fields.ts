/**
 * What a survey and a profile record hold, as zod schemas: one check for the form (client), the
 * server action, the command line and the queries. No database imports, so client forms may use it.
 */
import { z } from "zod";
import { SURVEY_ROLES } from "./vocabulary";

const isoDate = z
  .string()
  .trim()
  .refine((v) => v === "" || (/^\d{4}-\d{2}-\d{2}$/.test(v) && !Number.isNaN(Date.parse(`${v}T00:00:00Z`)) && new Date(`${v}T00:00:00Z`).toISOString().startsWith(v)), {
    message: "a date as YYYY-MM-DD (e.g. 2026-11-17), or nothing",
  });

/** A survey's short name for the command line and pipeline files: lower case, digits and dashes. */
export const surveySlug = z
  .string()
  .trim()
  .regex(/^[a-z0-9][a-z0-9-]{0,62}$/, "lower-case letters, digits and dashes, starting with a letter or digit (e.g. quillmoor)");

/** The descriptive fields of a survey (all optional text, dates as YYYY-MM-DD). */
export const surveyDetails = z
  .object({
    name: z.string().trim().min(1, "a name").max(200),
    client: z.string().trim().max(200).default(""),
    site: z.string().trim().max(200).default(""),
    purpose: z.string().trim().max(2000).default(""),
    startDate: isoDate.default(""),
    endDate: isoDate.default(""),
    notes: z.string().trim().max(8000).default(""),
  })
  .refine((v) => v.startDate === "" || v.endDate === "" || v.startDate <= v.endDate, {
    path: ["endDate"],
    message: "an end date on or after the start date",
  });
export type SurveyDetails = z.infer<typeof surveyDetails>;

/** A new survey: its short name and its details. */
export const newSurvey = z.intersection(z.object({ slug: surveySlug }), surveyDetails);
export type NewSurvey = z.infer<typeof newSurvey>;

/** A coordinate reference written as an EPSG code, e.g. "EPSG:27700" (4 or 5 digits). */
export const crsCode = z
  .string()
  .trim()
  .transform((v) => v.toUpperCase())
  .refine((v) => v === "" || /^EPSG:\d{4,5}$/.test(v), { message: 'an EPSG code like "EPSG:27700", or nothing' });

const coordinate = z.number({ message: "a number" }).finite("a finite number").nullable().default(null);

/** A profile: line name, orientation, spread, and its ends in a stated coordinate reference. */
export const profileFields = z
  .object({
    name: z
      .string()
      .trim()
      .min(1, "a line name")
      .max(60)
      .regex(/^[A-Za-z0-9][A-Za-z0-9 ._-]*$/, "letters, digits, spaces, dots, dashes or underscores (e.g. QM-1)"),
    description: z.string().trim().max(2000).default(""),
    /** Degrees clockwise from grid north, 0 to <360. */
    orientationDeg: z.number({ message: "a number of degrees" }).min(0, "0 or more degrees").lt(360, "less than 360 degrees").nullable().default(null),
    spreadDescription: z.string().trim().max(500).default(""),
    crs: crsCode.default(""),
    startX: coordinate,
    startY: coordinate,
    endX: coordinate,
    endY: coordinate,
  })
  .superRefine((v, ctx) => {
    const ends = [v.startX, v.startY, v.endX, v.endY];
    const given = ends.filter((e) => e !== null).length;
    if (given !== 0 && given !== 4) {
      for (const [k, e] of [["startX", v.startX], ["startY", v.startY], ["endX", v.endX], ["endY", v.endY]] as const) {
        if (e === null) ctx.addIssue({ code: "custom", path: [k], message: "all four end coordinates, or none" });
      }
    }
    if (given === 4 && v.crs === "") ctx.addIssue({ code: "custom", path: ["crs"], message: "the coordinate reference of the ends (e.g. EPSG:27700)" });
  });
export type ProfileFields = z.infer<typeof profileFields>;

/** Someone on a survey, by e-mail, with what they do on it. */
export const surveyPerson = z.object({
  email: z.string().trim().toLowerCase().email("an e-mail address of a user"),
  role: z.enum(SURVEY_ROLES, { message: `one of: ${SURVEY_ROLES.join(", ")}` }),
});
