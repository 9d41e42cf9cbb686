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
