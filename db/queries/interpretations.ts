/**
 * The lead's interpretation of a run, per report section, versioned: a save adds a row with the
 * next version of its (run, section), so every text that went into a report can be found again.
 * Only a run whose latest review is an approval can be interpreted.
 */
import { and, asc, desc, eq } from "drizzle-orm";
import type { Db } from "../client";
import { interpretations } from "../schema";
import { RecordError } from "../errors";
import { latestDecision } from "./review-decisions";

/** The sections a lead writes, in report order, with their headings. */
export const INTERPRETATION_SECTIONS = [
  { id: "summary", heading: "Summary" },
  { id: "model", heading: "What the model shows" },
  { id: "data-fit", heading: "How well the data are fitted" },
  { id: "recommendations", heading: "Recommendations" },
] as const;
export type InterpretationSection = (typeof INTERPRETATION_SECTIONS)[number]["id"];

export interface InterpretationRow {
  id: number;
  runId: number;
  section: string;
  text: string;
  version: number;
  authorUserId: number | null;
  authorLabel: string;
  at: Date;
}

/** Longest text kept per section, characters. */
export const INTERPRETATION_MAX_CHARS = 8000;

/**
 * Saves the text of one section as its next version. Refuses a run that is not approved, an
 * unknown section and a text longer than {@link INTERPRETATION_MAX_CHARS}. Saving the same text
 * as the latest version adds nothing and answers the latest row. Call inside a write transaction.
 */
export function saveInterpretation(
  db: Db,
  input: { runId: number; section: string; text: string; authorUserId: number | null; authorLabel: string },
): InterpretationRow {
  if (!INTERPRETATION_SECTIONS.some((s) => s.id === input.section)) {
    throw new RecordError("bad-input", `"${input.section}" is not a report section; expected ${INTERPRETATION_SECTIONS.map((s) => s.id).join(", ")}`, "section");
  }
  const text = input.text.replace(/\r\n/g, "\n").trim();
  if (text.length > INTERPRETATION_MAX_CHARS) {
    throw new RecordError("bad-input", `The ${input.section} text has ${text.length} characters; at most ${INTERPRETATION_MAX_CHARS} are kept.`, input.section);
  }
  const decision = latestDecision(db, input.runId);
  if (decision?.decision !== "approved") {
    throw new RecordError("conflict", `Run ${input.runId} is not approved; a lead approves a run before interpreting it.`, "runId");
  }
  const last = db
    .select()
    .from(interpretations)
    .where(and(eq(interpretations.runId, input.runId), eq(interpretations.section, input.section)))
    .orderBy(desc(interpretations.version))
    .limit(1)
    .get();
  if (last && last.text === text) return last;
  return db
    .insert(interpretations)
    .values({
      runId: input.runId,
      section: input.section,
      text,
      version: (last?.version ?? 0) + 1,
      authorUserId: input.authorUserId,
      authorLabel: input.authorLabel,
      at: new Date(),
    })
    .returning()
    .get();
}

/** The latest version of each section of a run's interpretation, in section order (sections never written are absent). */
export function latestInterpretation(db: Db, runId: number): InterpretationRow[] {
  const rows = db.select().from(interpretations).where(eq(interpretations.runId, runId)).orderBy(asc(interpretations.version)).all();
  const latest = new Map<string, InterpretationRow>();
  for (const r of rows) latest.set(r.section, r);
  return INTERPRETATION_SECTIONS.map((s) => latest.get(s.id)).filter((r): r is InterpretationRow => r !== undefined);
}

/** Every saved version of a run's interpretation, oldest first. */
export function interpretationHistory(db: Db, runId: number): InterpretationRow[] {
  return db.select().from(interpretations).where(eq(interpretations.runId, runId)).orderBy(asc(interpretations.id)).all();
}
