/**
 * The one vocabulary of run and step states, from the database to the badge: the database's
 * words (db/schema.ts RUN_STATUSES, STEP_STATUSES) and the words people read for them. Every
 * page, filter and badge takes its words from here.
 */
import { RUN_STATUSES, STEP_STATUSES } from "@/db/vocabulary";

export type AnyStatus = (typeof RUN_STATUSES)[number] | (typeof STEP_STATUSES)[number];

/** Display word of each state. */
export const STATUS_WORDS: Record<AnyStatus, string> = {
  queued: "Queued",
  waiting: "Waiting",
  running: "Running",
  succeeded: "Succeeded",
  failed: "Failed",
  cancelled: "Cancelled",
  interrupted: "Interrupted",
  skipped: "Skipped",
};

/** What each state means, for tooltips. */
export const STATUS_MEANINGS: Record<AnyStatus, string> = {
  queued: "waiting for a process to start it",
  waiting: "waiting for the steps before it",
  running: "being computed now",
  succeeded: "finished and recorded its results",
  failed: "stopped on an error",
  cancelled: "stopped on request",
  interrupted: "its process ended without finishing; it can be resumed",
  skipped: "not run because an earlier step did not succeed",
};

/** The word for a state, or the raw value for a state this table does not know. */
export function statusWord(status: string): string {
  return (STATUS_WORDS as Record<string, string>)[status] ?? status;
}

/** While a stop is being carried out. */
export const STOPPING_WORD = "Cancelling…";

/** Run states as filter choices (value, word). */
export const RUN_STATUS_CHOICES = RUN_STATUSES.map((s) => ({ value: s, label: STATUS_WORDS[s] }));
