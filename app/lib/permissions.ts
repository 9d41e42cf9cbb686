/**
 * Who may do what: one table of role to permissions. Every route handler and server action
 * checks it through `requirePermission` (app/lib/session.ts), whatever the page shows.
 */
import type { Role } from "@/db/schema";

export const PERMISSIONS = [
  /** See runs, steps, logs, artifacts, traces, models. */
  "runs.read",
  /** Start a run of a pipeline version on a dataset. */
  "runs.start",
  /** Rerun from a step with changed parameters. */
  "runs.rerun",
  /** Ask a running run to stop. */
  "runs.cancel",
  /** Save new pipeline versions. */
  "pipelines.edit",
  /** Approve a run or send it back. */
  "runs.review",
  /** Read the audit trail. */
  "audit.read",
  /** Add and invite users, change roles, deactivate. */
  "users.manage",
] as const;
export type Permission = (typeof PERMISSIONS)[number];

const PROCESSOR: Permission[] = ["runs.read", "runs.start", "runs.rerun", "runs.cancel", "pipelines.edit", "audit.read"];

/** The table. An auditor reads everything and changes nothing. */
export const ROLE_PERMISSIONS: Record<Role, readonly Permission[]> = {
  admin: [...PERMISSIONS],
  lead: [...PROCESSOR, "runs.review"],
  processor: PROCESSOR,
  auditor: ["runs.read", "audit.read"],
};

/** Plain-language names of the roles for pages. */
export const ROLE_LABELS: Record<Role, string> = {
  admin: "Administrator",
  lead: "Lead",
  processor: "Processor",
  auditor: "Auditor",
};

/** True when `role` holds `permission`. */
export function can(role: Role | undefined | null, permission: Permission): boolean {
  return role ? ROLE_PERMISSIONS[role].includes(permission) : false;
}

/** Sentence used in 403 answers. */
export function forbiddenMessage(role: Role, permission: Permission): string {
  const what: Record<Permission, string> = {
    "runs.read": "view runs",
    "runs.start": "start runs",
    "runs.rerun": "rerun steps",
    "runs.cancel": "stop runs",
    "pipelines.edit": "edit pipelines",
    "runs.review": "approve or send back runs",
    "audit.read": "read the audit trail",
    "users.manage": "manage users",
  };
  return `The ${ROLE_LABELS[role].toLowerCase()} role may not ${what[permission]}.`;
}
