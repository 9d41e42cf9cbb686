"use client";

import { useState } from "react";
import { useController, type Control } from "react-hook-form";
import type { ParamDoc } from "@/pipeline/registry";
import { fieldProblem, fieldValue, labelOfName, moveItem, newItem, removeItem, unitOfName, type Item } from "./object-list";

/** A text box for a number or text field that keeps what is being typed (e.g. "2.") while the value follows. */
function TextBox({ id, value, numeric, placeholder, invalid, onText }: { id: string; value: unknown; numeric: boolean; placeholder: string; invalid: boolean; onText: (t: string) => void }) {
  const shown = value === undefined ? "" : String(value);
  const [text, setText] = useState(shown);
  const [seen, setSeen] = useState(shown);
  if (seen !== shown) {
    // The value changed from outside (reorder, add, remove): show it, unless the text typed reads as it.
    setSeen(shown);
    if (!(numeric && text.trim() !== "" && Number(text) === value)) setText(shown);
  }
  return (
    <input
      id={id}
      type="text"
      inputMode={numeric ? "decimal" : undefined}
      className="field mt-1"
      value={text}
      placeholder={placeholder}
      aria-invalid={invalid}
      onChange={(e) => {
        setText(e.target.value);
        onText(e.target.value);
      }}
    />
  );
}

function parse(text: string): Item[] {
  try {
    const v = JSON.parse(text) as unknown;
    return Array.isArray(v) ? (v.filter((x) => typeof x === "object" && x !== null) as Item[]) : [];
  } catch {
    return [];
  }
}

/**
 * A setting that is a list of objects (e.g. the inversion's frequency stages) as a list of
 * small forms: each field with its label, unit and limits; add, remove and reorder items.
 * The form holds the list as JSON text, so submitting works as for other settings.
 */
export function ObjectListField({
  id,
  name,
  docs,
  control,
  noun = "item",
}: {
  id: string;
  /** The field's name in the form (it holds the list as JSON text). */
  name: string;
  docs: ParamDoc[];
  control: Control<never>;
  noun?: string;
}) {
  const { field } = useController({ control, name: name as never });
  const list = parse(String(field.value ?? "[]"));
  const set = (next: Item[]) => field.onChange(JSON.stringify(next));
  const setField = (i: number, doc: ParamDoc, raw: string | boolean) => {
    const next = list.map((it) => ({ ...it }));
    const v = fieldValue(doc, raw);
    if (v === undefined) delete next[i][doc.name];
    else next[i][doc.name] = v;
    set(next);
  };

  return (
    <div id={id} className="space-y-2" data-testid={`list-${name}`}>
      <ol className="space-y-2">
        {list.map((item, i) => (
          <li key={i} className="rounded-md border border-line bg-panel p-3" data-testid={`list-item-${name}-${i}`}>
            <div className="mb-2 flex flex-wrap items-center justify-between gap-2">
              <span className="text-sm font-semibold capitalize">{noun} {i + 1}</span>
              <span className="flex gap-1">
                <button type="button" className="btn px-2 py-0.5 text-xs" onClick={() => set(moveItem(list, i, i - 1))} disabled={i === 0} aria-label={`Move ${noun} ${i + 1} up`}>↑ Up</button>
                <button type="button" className="btn px-2 py-0.5 text-xs" onClick={() => set(moveItem(list, i, i + 1))} disabled={i === list.length - 1} aria-label={`Move ${noun} ${i + 1} down`}>↓ Down</button>
                <button type="button" className="btn px-2 py-0.5 text-xs text-bad" onClick={() => set(removeItem(list, i))} disabled={list.length <= 1} aria-label={`Remove ${noun} ${i + 1}`}>Remove</button>
              </span>
            </div>
            <div className="grid gap-x-4 gap-y-2 sm:grid-cols-2 lg:grid-cols-3">
              {docs.map((d) => {
                const fid = `${id}-${i}-${d.name}`;
                const unit = unitOfName(d.name);
                const v = item[d.name];
                const problem = fieldProblem(d, v);
                return (
                  <div key={d.name}>
                    <label htmlFor={fid} className="label" title={d.description}>
                      {labelOfName(d.name)}{unit ? <span className="ml-1 muted">({unit})</span> : null}
                    </label>
                    {d.type === "boolean" ? (
                      <input id={fid} type="checkbox" className="mt-2 block" checked={Boolean(v)} onChange={(e) => setField(i, d, e.target.checked)} />
                    ) : d.type === "enum" && d.choices ? (
                      <select id={fid} className="field mt-1" value={v === undefined ? "" : String(v)} onChange={(e) => setField(i, d, e.target.value)}>
                        {v === undefined ? <option value="">(default)</option> : null}
                        {d.choices.map((c) => <option key={c} value={c}>{c}</option>)}
                      </select>
                    ) : (
                      <TextBox id={fid} value={v} numeric={d.type === "number" || d.type === "integer"} placeholder={d.optional ? "not set" : "required"} invalid={Boolean(problem)} onText={(t) => setField(i, d, t)} />
                    )}
                    <p className="mt-0.5 text-[11px] leading-snug muted">{d.description}</p>
                    {problem ? <p className="text-xs text-bad" role="alert">{problem}</p> : null}
                  </div>
                );
              })}
            </div>
          </li>
        ))}
      </ol>
      <button type="button" className="btn text-sm" onClick={() => set([...list, newItem(docs, list)])} data-testid={`list-add-${name}`}>
        + Add a {noun}
      </button>
    </div>
  );
}
