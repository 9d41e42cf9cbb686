/**
 * One name per idea, from the database to the badge: roles, run and step states, doors. No
 * imports, so client components may use it (db/schema.ts re-exports it for the server).
 */

export const ROLES = ["admin", "lead", "processor", "auditor"] as const;
export type Role = (typeof ROLES)[number];

export const RUN_STATUSES = ["queued", "running", "succeeded", "failed", "cancelled", "interrupted"] as const;
export type RunStatus = (typeof RUN_STATUSES)[number];

export const STEP_STATUSES = ["waiting", "running", "succeeded", "failed", "cancelled", "skipped"] as const;
export type StepStatus = (typeof STEP_STATUSES)[number];

/** Which door started something. */
export const DOORS = ["cli", "web", "watcher"] as const;
export type Door = (typeof DOORS)[number];

/** What a person does on one survey (survey_people.role). */
export const SURVEY_ROLES = ["lead", "processor", "field lead", "field assistant"] as const;
export type SurveyRole = (typeof SURVEY_ROLES)[number];

/** The mail notices a person may choose to get. */
export const NOTICE_KINDS = ["run-stopped", "review-waiting", "review-decision", "upload-arrived"] as const;
export type NoticeKind = (typeof NOTICE_KINDS)[number];

/** The notices in words (account page, outbox). */
export const NOTICE_LABELS: Record<NoticeKind, string> = {
  "run-stopped": "A run I started failed or was interrupted",
  "review-waiting": "A run of a survey I lead waits for review",
  "review-decision": "A lead approved or sent back a run I started",
  "upload-arrived": "Field files arrived for a survey I am on (with each file's verdict)",
};
