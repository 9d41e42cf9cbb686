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
  /** Upload field files to a profile and mark an upload complete (it becomes a dataset). */
  "uploads.send",
  /** Save new pipeline versions. */
  "pipelines.edit",
  /** Approve a run or send it back. */
  "runs.review",
  /** Create and change surveys, their profiles and the people on them. */
  "surveys.edit",
  /** Read the audit trail. */
  "audit.read",
  /** Have a run executed again without the cache and its artifacts compared (leads and auditors). */
  "runs.reproduce",
  /** Add and invite users, change roles, deactivate. */
  "users.manage",
] as const;
export type Permission = (typeof PERMISSIONS)[number];

const PROCESSOR: Permission[] = ["runs.read", "runs.start", "runs.rerun", "runs.cancel", "uploads.send", "pipelines.edit", "surveys.edit", "audit.read"];

/** The table. An auditor reads everything and changes nothing (a reproduction changes no result: it only checks one). */
export const ROLE_PERMISSIONS: Record<Role, readonly Permission[]> = {
  admin: [...PERMISSIONS],
  lead: [...PROCESSOR, "runs.review", "runs.reproduce"],
  processor: PROCESSOR,
  auditor: ["runs.read", "audit.read", "runs.reproduce"],
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
    "uploads.send": "upload field files",
    "pipelines.edit": "edit pipelines",
    "runs.review": "approve or send back runs",
    "surveys.edit": "change surveys or profiles",
    "audit.read": "read the audit trail",
    "runs.reproduce": "reproduce runs",
    "users.manage": "manage users",
  };
  return `The ${ROLE_LABELS[role].toLowerCase()} role may not ${what[permission]}.`;
}

/** What a route handler or server action requires: a permission, any signed-in user, or nothing (next-auth's own routes). */
export type Requirement = Permission | "signed-in" | "public";

/**
 * Every route handler under app/api, as "METHOD /path" with the route's folder names, and what
 * it requires. The role-matrix test builds its cases from this table and checks that every
 * exported handler is listed.
 */
export const ROUTE_REQUIREMENTS: Record<string, Requirement> = {
  "GET /api/runs": "runs.read",
  "POST /api/runs": "runs.start",
  "GET /api/runs/[runId]": "runs.read",
  "POST /api/runs/[runId]/cancel": "runs.cancel",
  "GET /api/runs/[runId]/logs": "runs.read",
  "POST /api/runs/[runId]/rerun": "runs.rerun",
  "GET /api/runs/[runId]/reviews": "runs.read",
  "POST /api/runs/[runId]/reviews": "runs.review",
  "GET /api/runs/[runId]/steps/[stepLabel]": "runs.read",
  "GET /api/runs/[runId]/steps/[stepLabel]/download": "runs.read",
  "GET /api/runs/[runId]/steps/[stepLabel]/intermediates": "runs.read",
  "GET /api/runs/[runId]/audit-export": "audit.read",
  "GET /api/runs/[runId]/reports/[hash]": "runs.read",
  "GET /api/artifacts/[hash]": "runs.read",
  "GET /api/artifacts/[hash]/field": "runs.read",
  "GET /api/artifacts/[hash]/lines": "runs.read",
  "GET /api/artifacts/[hash]/model": "runs.read",
  "GET /api/artifacts/[hash]/positions": "runs.read",
  "GET /api/artifacts/[hash]/snapshots": "runs.read",
  "GET /api/artifacts/[hash]/spectra": "runs.read",
  "GET /api/artifacts/[hash]/dispersion": "runs.read",
  "GET /api/artifacts/[hash]/traces": "runs.read",
  "GET /api/audit": "audit.read",
  "GET /api/pipeline-versions/[versionId]/yaml": "runs.read",
  "GET /api/surveys": "runs.read",
  "POST /api/surveys": "surveys.edit",
  "GET /api/surveys/[slug]": "runs.read",
  "POST /api/surveys/[slug]/profiles": "surveys.edit",
  "POST /api/upload-sessions": "uploads.send",
  "GET /api/upload-sessions/[sessionId]": "runs.read",
  "POST /api/upload-sessions/[sessionId]/complete": "uploads.send",
  "POST /api/uploads/[[...path]]": "uploads.send",
  "PATCH /api/uploads/[[...path]]": "uploads.send",
  "HEAD /api/uploads/[[...path]]": "uploads.send",
  "GET /api/field-checks/[runId]": "runs.read",
  "GET /api/auth/[...nextauth]": "public",
  "POST /api/auth/[...nextauth]": "public",
};

/** Every server action (app/lib/actions) and what it requires; the role-matrix test is built from it. */
export const ACTION_REQUIREMENTS: Record<string, Requirement> = {
  addUser: "users.manage",
  changeRole: "users.manage",
  changeActive: "users.manage",
  changeOwnPassword: "signed-in",
  decideRun: "runs.review",
  savePipeline: "pipelines.edit",
  startReproduction: "runs.reproduce",
  saveRunInterpretation: "runs.review",
  makeRunReport: "runs.review",
  saveNoticePreferences: "signed-in",
  requestPasswordReset: "public",
  setPasswordWithLink: "public",
  addSurvey: "surveys.edit",
  editSurvey: "surveys.edit",
  addSurveyProfile: "surveys.edit",
  editSurveyProfile: "surveys.edit",
  putPersonOnSurvey: "surveys.edit",
};

/** True when `role` (null: nobody signed in) meets `requirement`. */
export function meets(role: Role | null, requirement: Requirement): boolean {
  if (requirement === "public") return true;
  if (role === null) return false;
  return requirement === "signed-in" ? true : can(role, requirement);
}
