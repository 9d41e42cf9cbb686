"use server";

/**
 * The lead's interpretation and the client report as server actions: both check "runs.review"
 * themselves; the engine's own functions (pipeline/report) save, make, store and record.
 */
import { revalidatePath } from "next/cache";
import { z } from "zod";
import { getDb } from "@/db/client";
import { INTERPRETATION_MAX_CHARS, INTERPRETATION_SECTIONS } from "@/db/queries/interpretations";
import { createReport } from "@/pipeline/report/create";
import { recordInterpretation } from "@/pipeline/report/interpretation";
import { requirePermission, webActor } from "../session";
import { errorState, type FormState } from "./form-state";

const interpretationSchema = z.object({
  runId: z.coerce.number().int().positive(),
  sections: z.object(
    Object.fromEntries(INTERPRETATION_SECTIONS.map((s) => [s.id, z.string().max(INTERPRETATION_MAX_CHARS, `At most ${INTERPRETATION_MAX_CHARS} characters.`).default("")])) as Record<
      string,
      z.ZodDefault<z.ZodString>
    >,
  ),
});

/** Saves the interpretation of an approved run (each changed section becomes its next version). */
export async function saveRunInterpretation(input: { runId: number; sections: Record<string, string> }): Promise<FormState> {
  try {
    const user = await requirePermission("runs.review");
    const body = interpretationSchema.parse(input);
    const rows = recordInterpretation(getDb(), body.runId, body.sections, webActor(user));
    revalidatePath(`/runs/${body.runId}/report`);
    return { ok: `Saved (${rows.map((r) => `${r.section} v${r.version}`).join(", ") || "nothing written"}).` };
  } catch (err) {
    return errorState(err);
  }
}

/** Comma-separated numbers, or empty. */
const positionsSchema = z
  .string()
  .max(200)
  .default("")
  .transform((s, ctx) => {
    const parts = s.split(",").map((x) => x.trim()).filter(Boolean);
    const values = parts.map(Number);
    if (values.some((v) => !Number.isFinite(v))) {
      ctx.addIssue({ code: "custom", message: "Positions in metres separated by commas, e.g. 10, 20, 30." });
      return z.NEVER;
    }
    return values;
  });

const reportSchema = z.object({
  runId: z.coerce.number().int().positive(),
  positions: positionsSchema,
  shots: z
    .string()
    .max(500)
    .default("")
    .transform((s) => s.split(",").map((x) => x.trim()).filter(Boolean)),
});

/** Makes the client report of an approved run; answers its page count, generation time and hash. */
export async function makeRunReport(input: { runId: number; positions: string; shots: string }): Promise<FormState & { hash?: string }> {
  try {
    const user = await requirePermission("runs.review");
    const body = reportSchema.parse(input);
    const r = await createReport(getDb(), body.runId, webActor(user), { profilePositionsM: body.positions, fitShots: body.shots });
    revalidatePath(`/runs/${body.runId}/report`);
    return { ok: `Report made: ${r.pages} pages in ${(r.generationMs / 1000).toFixed(1)} s.`, hash: r.hash };
  } catch (err) {
    const state = errorState(err);
    // The engine names its fields after the report choices; the form names them after its inputs.
    if (state.fields?.profilePositionsM) state.fields = { positions: state.fields.profilePositionsM };
    if (state.fields?.fitShots) state.fields = { shots: state.fields.fitShots };
    return state;
  }
}
