/**
 * The runs table's filter, as URL search parameters: parsed with zod in the route handler
 * and the page alike, so both read the same names.
 */
import { z } from "zod";
import { RUN_STATUSES } from "@/db/vocabulary";

export const REVIEW_STATES = ["awaiting", "approved", "returned"] as const;
export type ReviewState = (typeof REVIEW_STATES)[number];

/** Words for the review states (filter choices and the runs table). */
export const REVIEW_WORDS: Record<ReviewState, string> = { awaiting: "Awaiting review", approved: "Approved", returned: "Sent back" };

const emptyToUndefined = (v: unknown) => (v === "" || v === null ? undefined : v);

export const runFilterSchema = z.object({
  survey: z.preprocess(emptyToUndefined, z.string().max(100).optional()),
  pipeline: z.preprocess(emptyToUndefined, z.string().max(200).optional()),
  status: z.preprocess(emptyToUndefined, z.enum(RUN_STATUSES).optional()),
  person: z.preprocess(emptyToUndefined, z.string().max(200).optional()),
  /** The lead's review: "awaiting" (succeeded, no decision yet), "approved" or "returned" (latest decision). */
  review: z.preprocess(emptyToUndefined, z.enum(REVIEW_STATES).optional()),
  /** Inclusive day, YYYY-MM-DD. */
  from: z.preprocess(emptyToUndefined, z.string().regex(/^\d{4}-\d{2}-\d{2}$/, "expected a date like 2025-11-14").optional()),
  to: z.preprocess(emptyToUndefined, z.string().regex(/^\d{4}-\d{2}-\d{2}$/, "expected a date like 2025-11-14").optional()),
  sort: z.preprocess(emptyToUndefined, z.enum(["created", "status", "pipeline", "duration"]).default("created")),
  dir: z.preprocess(emptyToUndefined, z.enum(["asc", "desc"]).default("desc")),
  page: z.preprocess(emptyToUndefined, z.coerce.number().int().min(1).default(1)),
  pageSize: z.preprocess(emptyToUndefined, z.coerce.number().int().min(5).max(200).default(25)),
});
export type RunFilterParams = z.output<typeof runFilterSchema>;

/** The db filter for parsed params (dates as whole days in local time). */
export function toDbFilter(p: RunFilterParams) {
  return {
    surveySlug: p.survey,
    pipelineName: p.pipeline,
    status: p.status,
    startedBy: p.person,
    review: p.review,
    from: p.from ? new Date(`${p.from}T00:00:00`) : undefined,
    to: p.to ? new Date(`${p.to}T23:59:59.999`) : undefined,
    sort: p.sort,
    dir: p.dir,
    page: p.page,
    pageSize: p.pageSize,
  };
}

/** Search-parameter string for a filter (defaults left out). */
export function filterToQuery(p: Partial<RunFilterParams>): string {
  const q = new URLSearchParams();
  for (const [k, v] of Object.entries(p)) {
    if (v === undefined || v === "") continue;
    if ((k === "sort" && v === "created") || (k === "dir" && v === "desc") || (k === "page" && v === 1) || (k === "pageSize" && v === 25)) continue;
    q.set(k, String(v));
  }
  const s = q.toString();
  return s ? `?${s}` : "";
}
