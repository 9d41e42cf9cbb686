import type { Permission } from "@/app/lib/permissions";

/** What each permission lets a person do, in plain words (People page). */
export const PERMISSION_WORDS: Record<Permission, string> = {
  "runs.read": "see runs, results and logs",
  "runs.start": "start runs",
  "runs.rerun": "rerun with changed settings",
  "runs.cancel": "stop runs",
  "uploads.send": "upload field files to a profile",
  "pipelines.edit": "save pipeline versions",
  "runs.review": "approve runs or send them back",
  "surveys.edit": "create and change surveys, profiles and who is on them",
  "audit.read": "read and export the audit trail",
  "runs.reproduce": "have a run executed again and its results compared",
  "users.manage": "add people, change roles, deactivate accounts",
};
