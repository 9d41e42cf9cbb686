"use client";

import { useEffect, useMemo, useState } from "react";
import { useRouter } from "next/navigation";
import { useForm } from "react-hook-form";
import { zodResolver } from "@hookform/resolvers/zod";
import { z } from "zod";
import { ApiError, postJson } from "@/app/lib/queries";
import type { ParamDoc } from "@/pipeline/registry";
import { readableName, unitOfDescription } from "@/app/ui/format";
import { StructuredSettingField } from "./object-list-field";

interface StepForm {
  label: string;
  stepId: string;
  params: Record<string, unknown>;
  docs: ParamDoc[];
  missing: string | null;
}

type Values = Record<string, Record<string, unknown>>;

/** zod schema for one parameter as the form holds it (arrays and objects as JSON text). */
function fieldSchema(doc: ParamDoc): z.ZodType {
  switch (doc.type) {
    case "number":
    case "integer": {
      let s = z.number({ message: "Enter a number." });
      if (doc.type === "integer") s = s.int("Enter a whole number.");
      if (doc.minimum !== undefined) s = s.min(doc.minimum, `At least ${doc.minimum}.`);
      if (doc.maximum !== undefined) s = s.max(doc.maximum, `At most ${doc.maximum}.`);
      // An empty number box (NaN) keeps the run's value, e.g. for settings that may be unset.
      return z.preprocess((v) => (v === null || v === "" || (typeof v === "number" && Number.isNaN(v)) ? undefined : v), s.optional());
    }
    case "boolean":
      return z.boolean();
    case "enum":
      // Select boxes hold text; choices may be numbers (e.g. 0, 50, 60 Hz), compared as text.
      return doc.choices ? z.preprocess((v) => (v === null || v === undefined ? v : String(v)), z.enum(doc.choices as [string, ...string[]]).optional()) : z.string();
    case "array":
    case "object":
      return z.string().refine((t) => {
        try {
          JSON.parse(t);
          return true;
        } catch {
          return false;
        }
      }, "Enter valid JSON.");
    default:
      return z.string();
  }
}

const isJsonKind = (d: ParamDoc) => d.type === "array" || d.type === "object";

/** " Range 0 to 1.", leaving out limits that only say "any safe integer". */
function rangeText(d: ParamDoc): string {
  const lo = d.minimum !== undefined && Math.abs(d.minimum) < Number.MAX_SAFE_INTEGER ? d.minimum : undefined;
  const hi = d.maximum !== undefined && Math.abs(d.maximum) < Number.MAX_SAFE_INTEGER ? d.maximum : undefined;
  if (lo === undefined && hi === undefined) return "";
  if (hi === undefined) return ` At least ${lo}.`;
  if (lo === undefined) return ` At most ${hi}.`;
  return ` Range ${lo} to ${hi}.`;
}

/** The unit of a setting: from its name's suffix, else from its description. */
function unitOf(d: ParamDoc): string | null {
  return readableName(d.name).unit ?? unitOfDescription(d.description);
}

/**
 * The rerun form, generated from each step's parameter documentation: choose the step to start
 * from, change settings of that step or later ones (units and defaults shown). The engine
 * validates the overrides; its field errors are shown beside the fields.
 */
export function RerunForm({ runId, steps, initialFrom }: { runId: number; steps: StepForm[]; initialFrom: string }) {
  const router = useRouter();
  const [from, setFrom] = useState(initialFrom);
  const [serverError, setServerError] = useState<string | null>(null);
  const fromIndex = steps.findIndex((s) => s.label === from);
  const editable = useMemo(() => steps.slice(fromIndex), [steps, fromIndex]);

  const schema = useMemo(
    () =>
      z.object(
        Object.fromEntries(
          editable.map((s) => [s.label, z.object(Object.fromEntries(s.docs.map((d) => [d.name, fieldSchema(d).optional()])))]),
        ),
      ),
    [editable],
  );
  const defaults = useMemo<Values>(
    () =>
      Object.fromEntries(
        editable.map((s) => [
          s.label,
          Object.fromEntries(s.docs.map((d) => [d.name, isJsonKind(d) ? JSON.stringify(s.params[d.name] ?? d.default ?? null) : (s.params[d.name] ?? d.default)])),
        ]),
      ),
    [editable],
  );
  const form = useForm<Values>({ resolver: zodResolver(schema as never) as never, defaultValues: defaults, values: defaults });
  const { register, handleSubmit, formState, setError, clearErrors, watch } = form;

  // A server (cross-field) error belongs to the values it was given: once any setting of that
  // step changes, it is stale and goes (the next submit checks again).
  useEffect(() => {
    const sub = watch((_values, { name }) => {
      if (!name) return;
      const label = name.split(".")[0];
      const errs = (form.formState.errors as Record<string, Record<string, { type?: string }> | undefined>)[label];
      if (!errs) return;
      for (const [field, e] of Object.entries(errs)) if (e?.type === "server") clearErrors(`${label}.${field}` as never);
      setServerError(null);
    });
    return () => sub.unsubscribe();
  }, [watch, clearErrors, form.formState]);

  async function onSubmit(values: Values) {
    setServerError(null);
    const overrides: Values = {};
    for (const s of editable) {
      for (const d of s.docs) {
        let v = values[s.label]?.[d.name];
        if (isJsonKind(d) && typeof v === "string") v = JSON.parse(v);
        if (v === undefined || v === null || (typeof v === "number" && Number.isNaN(v))) continue;
        if (d.type === "enum" && typeof s.params[d.name] === "number") v = Number(v);
        if (JSON.stringify(v) !== JSON.stringify(s.params[d.name])) (overrides[s.label] ??= {})[d.name] = v;
      }
    }
    try {
      const res = await postJson<{ runId: number }>(`/api/runs/${runId}/rerun`, { fromLabel: from, overrides });
      router.push(`/runs/${res.runId}`);
    } catch (err) {
      // Shown once: beside the field it names, or else above the button.
      if (err instanceof ApiError && err.field && err.field.includes(".") && editable.some((s) => err.field!.startsWith(`${s.label}.`))) {
        setError(err.field as never, { type: "server", message: err.message });
      } else {
        setServerError(err instanceof Error ? err.message : String(err));
      }
    }
  }

  const errorOf = (label: string, name: string): string | undefined => {
    const e = (formState.errors as Record<string, Record<string, { message?: string }> | undefined>)[label]?.[name];
    return e?.message;
  };

  return (
    <form onSubmit={handleSubmit(onSubmit)} className="space-y-4" aria-label="Rerun settings" noValidate>
      <div className="card p-4">
        <label className="label" htmlFor="from-step">Start from step</label>
        <select id="from-step" className="field mt-1 w-auto" value={from} onChange={(e) => setFrom(e.target.value)} data-testid="from-step">
          {steps.map((s, i) => <option key={s.label} value={s.label}>{i + 1}. {s.label} ({s.stepId})</option>)}
        </select>
      </div>
      {editable.map((s, i) => (
        <fieldset key={s.label} className="card p-4" data-testid={`rerun-step-${s.label}`}>
          <legend className="px-1 text-sm font-semibold">{s.label} <span className="font-normal muted">({s.stepId}){i === 0 ? " · starts here" : ""}</span></legend>
          {s.missing ? <p className="text-sm text-warn">{s.missing}</p> : null}
          <div className="grid gap-x-6 gap-y-3 md:grid-cols-2">
            {s.docs.map((d) => {
              const name = `${s.label}.${d.name}`;
              const id = `f-${s.label}-${d.name}`;
              const unit = unitOf(d);
              const err = errorOf(s.label, d.name);
              return (
                <div key={d.name} className={isJsonKind(d) ? "md:col-span-2" : undefined}>
                  <label htmlFor={id} className="label">
                    <span className="text-ink">{readableName(d.name).words}</span>{unit ? <span className="ml-1 muted">({unit})</span> : null}
                    <span className="ml-2 font-mono text-[10px] text-ink-faint">{d.name}</span>
                  </label>
                  {d.type === "boolean" ? (
                    <input id={id} type="checkbox" className="mt-2" {...register(name)} />
                  ) : d.type === "enum" && d.choices ? (
                    <select id={id} className="field mt-1" {...register(name)}>
                      {d.choices.map((c) => <option key={c} value={c}>{c}</option>)}
                    </select>
                  ) : d.type === "number" || d.type === "integer" ? (
                    <input id={id} type="number" step="any" className="field mt-1" placeholder={s.params[d.name] === null ? "not set" : undefined} aria-invalid={Boolean(err)} {...register(name, { valueAsNumber: true })} />
                  ) : isJsonKind(d) ? (
                    <StructuredSettingField id={id} name={name} doc={d} control={form.control as never} />
                  ) : (
                    <input id={id} type="text" className="field mt-1" {...register(name)} />
                  )}
                  <p className="mt-0.5 text-xs muted">
                    {d.description}
                    {d.description && !/[.!?)]$/.test(d.description) ? "." : ""}
                    {d.default !== undefined ? ` Default ${JSON.stringify(d.default)}.` : ""}
                    {rangeText(d)}
                  </p>
                  {err ? <p className="mt-0.5 text-xs text-bad" role="alert" data-testid={`field-error-${name}`}>{err}</p> : null}
                </div>
              );
            })}
            {s.docs.length === 0 && !s.missing ? <p className="text-sm muted">This step has no settings.</p> : null}
          </div>
        </fieldset>
      ))}
      {serverError ? <p role="alert" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad" data-testid="rerun-error">{serverError}</p> : null}
      <div className="flex gap-2">
        <button type="submit" className="btn-primary" disabled={formState.isSubmitting} data-testid="start-rerun">{formState.isSubmitting ? "Starting…" : "Start the rerun"}</button>
        <a href={`/runs/${runId}`} className="btn">Cancel</a>
      </div>
    </form>
  );
}
