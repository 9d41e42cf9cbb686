"use client";

import { useController, type Control } from "react-hook-form";
import type { ParamDoc } from "@/pipeline/registry";
import { SettingInput } from "./setting-input";

function parse(text: string): unknown {
  try {
    return JSON.parse(text) as unknown;
  } catch {
    return undefined;
  }
}

/**
 * A setting that is a list or an object (e.g. the inversion's frequency stages, a model's grid)
 * in a react-hook-form form, as generated fields (setting-input.tsx): the form holds the value as
 * JSON text, so submitting works as for other settings, and nobody types the JSON.
 */
export function StructuredSettingField({ id, name, doc, control }: { id: string; /** The field's name in the form (it holds the value as JSON text). */ name: string; doc: ParamDoc; control: Control<never> }) {
  const { field } = useController({ control, name: name as never });
  const value = parse(String(field.value ?? "null"));
  return <SettingInput id={id} doc={doc} value={value ?? undefined} path={name} testKey={name} onChange={(v) => field.onChange(JSON.stringify(v ?? null))} />;
}
