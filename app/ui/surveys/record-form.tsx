"use client";

/**
 * The forms of survey and profile records: react-hook-form with the same zod schemas the server
 * action and the command line check (db/survey-fields.ts), so a field's message appears before
 * sending; the server action checks again and its field messages land on the same fields.
 */
import { useState, useTransition } from "react";
import { useRouter } from "next/navigation";
import { useForm } from "react-hook-form";
import { zodResolver } from "@hookform/resolvers/zod";
import type { z } from "zod";
import { addSurvey, addSurveyProfile, editSurvey, editSurveyProfile } from "@/app/lib/actions/surveys";
import type { FormState } from "@/app/lib/actions/form-state";
import { newSurvey, profileFields } from "@/db/survey-fields";

type Kind = "survey-new" | "survey-edit" | "profile-new" | "profile-edit";

interface FieldSpec {
  name: string;
  label: string;
  type?: "text" | "textarea" | "date" | "number";
  placeholder?: string;
  /** Shown under the field. */
  hint?: string;
  readOnlyWhenEditing?: boolean;
  /** Half-width in a two-column grid. */
  half?: boolean;
}

const SURVEY_FIELDS: FieldSpec[] = [
  { name: "slug", label: "Short name (command line, pipeline files)", placeholder: "quillmoor", readOnlyWhenEditing: true },
  { name: "name", label: "Name", placeholder: "Quillmoor playing field" },
  { name: "client", label: "Client", half: true },
  { name: "site", label: "Site", half: true },
  { name: "purpose", label: "Purpose", type: "textarea" },
  { name: "startDate", label: "First day in the field", type: "date", half: true },
  { name: "endDate", label: "Last day in the field", type: "date", half: true },
  { name: "notes", label: "Notes", type: "textarea" },
];

const PROFILE_FIELDS: FieldSpec[] = [
  { name: "name", label: "Line name", placeholder: "QM-1", readOnlyWhenEditing: true },
  { name: "description", label: "Description", type: "textarea" },
  { name: "orientationDeg", label: "Orientation (degrees clockwise from grid north)", type: "number" },
  { name: "spreadDescription", label: "Spread", placeholder: "48 vertical 4.5 Hz geophones at 1 m" },
  { name: "crs", label: "Coordinate reference of the ends", placeholder: "EPSG:27700", hint: "An EPSG code, e.g. EPSG:27700 or EPSG:32630." },
  { name: "startX", label: "Start x / easting", type: "number", half: true },
  { name: "startY", label: "Start y / northing", type: "number", half: true },
  { name: "endX", label: "End x / easting", type: "number", half: true },
  { name: "endY", label: "End y / northing", type: "number", half: true },
];

const SETUP = {
  "survey-new": { schema: newSurvey, action: addSurvey, fields: SURVEY_FIELDS, submit: "Create survey" },
  "survey-edit": { schema: newSurvey, action: editSurvey, fields: SURVEY_FIELDS, submit: "Save survey" },
  "profile-new": { schema: profileFields, action: addSurveyProfile, fields: PROFILE_FIELDS, submit: "Add profile" },
  "profile-edit": { schema: profileFields, action: editSurveyProfile, fields: PROFILE_FIELDS, submit: "Save profile" },
} as const;

type Values = Record<string, string | number | null>;

/** A survey or profile form; `survey` is the survey's short name for profile forms. */
export function RecordForm({ kind, initial, survey }: { kind: Kind; initial?: Values; survey?: string }) {
  const setup = SETUP[kind];
  const editing = kind.endsWith("-edit");
  const router = useRouter();
  const [state, setState] = useState<FormState>({});
  const [pending, startTransition] = useTransition();
  const defaults: Values = Object.fromEntries(setup.fields.map((f) => [f.name, initial?.[f.name] ?? (f.type === "number" ? null : "")]));
  const form = useForm<Values>({ resolver: zodResolver(setup.schema as z.ZodType as never) as never, defaultValues: defaults });
  const errors = form.formState.errors;

  const onValid = (values: Values) => {
    const data = new FormData();
    for (const f of setup.fields) {
      const v = values[f.name];
      data.set(f.name, v === null || v === undefined ? "" : String(v));
    }
    if (survey) data.set("survey", survey);
    startTransition(async () => {
      const answer = await setup.action({}, data);
      setState(answer);
      for (const [name, message] of Object.entries(answer.fields ?? {})) form.setError(name, { message });
      if (answer.ok && answer.redirectTo) router.push(answer.redirectTo);
      else if (answer.ok) router.refresh();
    });
  };

  const prefix = `${kind}-`;
  return (
    <form onSubmit={form.handleSubmit(onValid)} className="grid grid-cols-2 gap-3" aria-label={setup.submit} data-testid={`${kind}-form`} noValidate>
      {setup.fields.map((f) => {
        const id = `${prefix}${f.name}`;
        const readOnly = editing && f.readOnlyWhenEditing;
        const reg = form.register(f.name, f.type === "number" ? { setValueAs: (v: unknown) => (v === "" || v === null || v === undefined ? null : Number(v)) } : {});
        const message = errors[f.name]?.message;
        return (
          <div key={f.name} className={f.half ? "col-span-1" : "col-span-2"}>
            <label className="label" htmlFor={id}>{f.label}</label>
            {f.type === "textarea" ? (
              <textarea id={id} rows={2} className="field mt-1" placeholder={f.placeholder} {...reg} />
            ) : (
              <input
                id={id}
                type={f.type === "number" ? "text" : (f.type ?? "text")}
                inputMode={f.type === "number" ? "decimal" : undefined}
                className="field mt-1"
                placeholder={f.placeholder}
                readOnly={readOnly}
                aria-invalid={message ? true : undefined}
                {...reg}
              />
            )}
            {message ? <p className="mt-1 text-xs text-bad" data-testid={`field-error-${f.name}`}>{String(message)}</p> : f.hint ? <p className="mt-1 text-xs muted">{f.hint}</p> : null}
          </div>
        );
      })}
      <div className="col-span-2 flex items-center gap-3">
        <button type="submit" className="btn-primary" disabled={pending} data-testid={`${kind}-submit`}>
          {pending ? "Saving…" : setup.submit}
        </button>
        {state.ok ? <p role="status" className="text-sm text-ok">{state.ok}</p> : null}
        {state.error && !state.fields ? <p role="alert" className="text-sm text-bad" data-testid="form-error">{state.error}</p> : null}
      </div>
    </form>
  );
}
