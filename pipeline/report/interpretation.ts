/**
 * Saving the lead's interpretation of a run, whichever door asks: the new version of each
 * section and its audit event ("interpretation.save") in one write transaction.
 */
import { writeTransaction, type Db } from "../../db/client";
import { recordAudit, type Actor } from "../../db/queries/audit";
import { latestInterpretation, saveInterpretation, type InterpretationRow } from "../../db/queries/interpretations";

/**
 * Saves the given sections (section id → text); a section whose text is unchanged keeps its
 * version and records nothing. Answers the latest version of every written section.
 */
export function recordInterpretation(db: Db, runId: number, sections: Record<string, string>, actor: Actor): InterpretationRow[] {
  return writeTransaction(db, (tx) => {
    const before = new Map(latestInterpretation(tx, runId).map((r) => [r.section, r]));
    for (const [section, text] of Object.entries(sections)) {
      const prior = before.get(section);
      if (!prior && text.trim() === "") continue;
      const row = saveInterpretation(tx, { runId, section, text, authorUserId: actor.userId, authorLabel: actor.label });
      if (prior && row.id === prior.id) continue;
      recordAudit(tx, {
        actor,
        action: "interpretation.save",
        entityType: "run",
        entityId: runId,
        before: prior ? { section, version: prior.version } : undefined,
        after: { section, version: row.version, characters: row.text.length },
      });
    }
    return latestInterpretation(tx, runId);
  });
}
