"use server";

/**
 * Saving an edited pipeline as a server action: checks "pipelines.edit" itself, validates the
 * edit with the command line's pipeline-file parser (pipeline/pipeline-edit.ts) and records a new
 * version with its audit event. Field errors name the field as pipeline-file errors do
 * (`steps[4].settings.highCutHz`); every problem found is returned, each under its field.
 */
import { revalidatePath } from "next/cache";
import { z } from "zod";
import { getDb } from "@/db/client";
import { editFieldErrors, savePipelineEdit } from "@/pipeline/pipeline-edit";
import { rejectPrototypeKeys } from "../api";
import { requirePermission, webActor } from "../session";
import { errorState, type FormState } from "./form-state";

const editSchema = z.object({
  pipelineId: z.coerce.number().int().positive(),
  baseVersionId: z.coerce.number().int().positive(),
  description: z.string().max(4000).default(""),
  onBadFile: z.enum(["stop", "skip"]),
  steps: z
    .array(
      z.object({
        step: z.string().min(1).max(100),
        label: z.string().min(1).max(100),
        settings: z.record(z.string(), z.unknown()),
        input: z.record(z.string(), z.string()).optional(),
      }),
    )
    .min(1, "at least one step")
    .max(200),
});

/** What the editor gets back: form state, and the version saved. */
export interface PipelineSaveState extends FormState {
  versionId?: number;
  version?: number;
  created?: boolean;
}

/** Saves an edit of a pipeline (made on version `baseVersionId`) as a new version. */
export async function savePipeline(input: z.input<typeof editSchema>): Promise<PipelineSaveState> {
  try {
    const user = await requirePermission("pipelines.edit");
    // As the route handlers do: keys that reach a prototype are refused by name, not dropped.
    rejectPrototypeKeys((input as { steps?: unknown } | null)?.steps, "steps");
    const body = editSchema.parse(input);
    const saved = savePipelineEdit(getDb(), {
      pipelineId: body.pipelineId,
      baseVersionId: body.baseVersionId,
      edit: { description: body.description, onBadFile: body.onBadFile, steps: body.steps },
      actor: webActor(user),
    });
    revalidatePath(`/pipelines/${body.pipelineId}`);
    revalidatePath("/pipelines");
    return {
      ok: saved.created ? `Saved as version ${saved.version}.` : `Nothing changed: version ${saved.version} stays the newest.`,
      versionId: saved.versionId,
      version: saved.version,
      created: saved.created,
    };
  } catch (err) {
    // Every problem the check found, each at its field; the message lists them all (one per line).
    const found = editFieldErrors(err);
    if (found.length === 1) return { error: found[0].message, fields: { [found[0].field]: found[0].problem } };
    if (found.length > 1) {
      const fields: Record<string, string> = {};
      for (const f of found) fields[f.field] ??= f.problem;
      return { error: [`${found.length} problems, each shown at its field:`, ...found.map((f) => f.message)].join("\n"), fields };
    }
    return errorState(err);
  }
}
