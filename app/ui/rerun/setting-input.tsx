"use client";

import { useState } from "react";
import type { ParamDoc } from "@/pipeline/registry";
import { readableName, unitOfDescription } from "@/app/ui/format";
import { fieldProblem, moveItem, newItem, removeItem, type Item } from "./object-list";

/**
 * One step setting as form fields, generated from its documentation (ParamDoc, made on the
 * server from the step's zod schema): numbers, text, yes/no, choices, objects as nested fields,
 * lists of objects as small forms (add, remove, reorder), lists of objects of several kinds with
 * a kind chooser, lists of numbers or text and of fixed-length tuples as rows of boxes. The
 * rerun form and the pipeline editor both use it; neither writes JSON by hand.
 *
 * `path` names the value as pipeline-file errors do (`steps[4].settings.stages[0].lowPassHz`);
 * `errors` maps such paths to the engine's messages, shown beside the field they name.
 */
export interface SettingInputProps {
  id: string;
  doc: ParamDoc;
  value: unknown;
  onChange: (value: unknown) => void;
  path: string;
  errors?: Record<string, string>;
  /** Name used in test ids of lists (`list-<testKey>`); the path by default. */
  testKey?: string;
}

/** The unit of a setting: from its name's suffix, else from its description. */
export function unitOfDoc(d: ParamDoc): string | null {
  return readableName(d.name).unit ?? unitOfDescription(d.description);
}

/** " Range 0 to 1.", leaving out limits that only say "any safe integer". */
export function rangeText(d: ParamDoc): string {
  const lo = d.minimum !== undefined && Math.abs(d.minimum) < Number.MAX_SAFE_INTEGER ? d.minimum : undefined;
  const hi = d.maximum !== undefined && Math.abs(d.maximum) < Number.MAX_SAFE_INTEGER ? d.maximum : undefined;
  const above = d.exclusiveMinimum ? "Above" : "At least";
  const below = d.exclusiveMaximum ? "Below" : "At most";
  if (lo === undefined && hi === undefined) return "";
  if (hi === undefined) return ` ${above} ${lo}.`;
  if (lo === undefined) return ` ${below} ${hi}.`;
  return ` Range ${lo} to ${hi}.`;
}

/** A message when a value breaks its documented type or limits (exclusive limits included), else null. */
export function valueProblem(doc: ParamDoc, value: unknown): string | null {
  if (value === null && doc.nullable) return null;
  const p = fieldProblem(doc, value);
  if (p) return p;
  if (typeof value === "number") {
    if (doc.exclusiveMinimum && doc.minimum !== undefined && value <= doc.minimum) return `Above ${doc.minimum}.`;
    if (doc.exclusiveMaximum && doc.maximum !== undefined && value >= doc.maximum) return `Below ${doc.maximum}.`;
  }
  return null;
}

/** A text box that keeps what is being typed (e.g. "2.") while the value follows. */
function TextBox({ id, value, numeric, placeholder, invalid, onText, multiline }: { id: string; value: unknown; numeric: boolean; placeholder: string; invalid: boolean; onText: (t: string) => void; multiline?: boolean }) {
  const shown = value === undefined || value === null ? "" : String(value);
  const [text, setText] = useState(shown);
  const [seen, setSeen] = useState(shown);
  if (seen !== shown) {
    // The value changed from outside (reorder, add, remove): show it, unless the text typed reads as it.
    setSeen(shown);
    if (!(numeric && text.trim() !== "" && Number(text) === value)) setText(shown);
  }
  const common = {
    id,
    className: multiline ? "field mt-1 h-28 font-mono text-xs" : "field mt-1",
    value: text,
    placeholder,
    "aria-invalid": invalid,
    onChange: (e: React.ChangeEvent<HTMLInputElement | HTMLTextAreaElement>) => {
      setText(e.target.value);
      onText(e.target.value);
    },
  };
  return multiline ? <textarea {...common} /> : <input type="text" inputMode={numeric ? "decimal" : undefined} {...common} />;
}

/** The value of a number box: a number, null/undefined when empty, or the text itself (which the check refuses). */
function numberFromText(doc: ParamDoc, t: string): unknown {
  if (t.trim() === "") return doc.nullable ? null : undefined;
  const n = Number(t);
  return Number.isFinite(n) ? n : t;
}

/** The starting value of a new element or field: its default, else an empty value of its kind. */
function emptyOf(doc: ParamDoc): unknown {
  if (doc.default !== undefined) return structuredClone(doc.default);
  if (doc.nullable) return null;
  switch (doc.type) {
    case "boolean":
      return false;
    case "enum":
      return doc.choiceValues?.[0] ?? doc.choices?.[0];
    case "array":
      return doc.tuple ? doc.tuple.map(emptyOf) : [];
    case "object":
      return doc.fields ? Object.fromEntries(doc.fields.filter((f) => !f.optional || f.default !== undefined).map((f) => [f.name, emptyOf(f)])) : {};
    default:
      return undefined;
  }
}

/** A field with its label (words, unit, key), description, default, limits and error. */
export function LabelledSetting(props: SettingInputProps & { showKey?: boolean }) {
  const { id, doc, path, errors, showKey = true } = props;
  const unit = unitOfDoc(doc);
  const error = errors?.[path];
  const wide = doc.type === "array" || doc.type === "object" || doc.name === "csvGrid";
  return (
    <div className={wide ? "md:col-span-2" : undefined} data-setting={path}>
      <label htmlFor={id} className="label">
        <span className="text-ink">{readableName(doc.name).words}</span>
        {unit ? <span className="ml-1 muted">({unit})</span> : null}
        {showKey ? <span className="ml-2 font-mono text-[10px] text-ink-faint">{doc.name}</span> : null}
      </label>
      <SettingInput {...props} />
      <p className="mt-0.5 text-xs muted">
        {doc.description}
        {doc.description && !/[.!?)]$/.test(doc.description) ? "." : ""}
        {doc.default !== undefined && typeof doc.default !== "object" ? ` Default ${JSON.stringify(doc.default)}.` : ""}
        {rangeText(doc)}
      </p>
      {error ? <p className="mt-0.5 text-xs text-bad" role="alert" data-testid={`field-error-${path}`}>{error}</p> : null}
    </div>
  );
}

/** The input of one setting (without its label), by kind. */
export function SettingInput({ id, doc, value, onChange, path, errors, testKey }: SettingInputProps) {
  const local = doc.type === "array" || doc.type === "object" ? null : valueProblem(doc, value);
  const invalid = Boolean(local || errors?.[path]);
  const localNote = local ? <p className="text-xs text-bad" role="alert">{local}</p> : null;

  if (doc.type === "boolean") {
    return <input id={id} type="checkbox" className="mt-2 block" checked={Boolean(value)} onChange={(e) => onChange(e.target.checked)} />;
  }
  if (doc.type === "enum" && doc.choices) {
    const values = doc.choiceValues ?? doc.choices;
    const index = values.findIndex((c) => c === value || String(c) === String(value));
    return (
      <select id={id} className="field mt-1" value={index < 0 ? "" : String(index)} onChange={(e) => onChange(e.target.value === "" ? (doc.nullable ? null : undefined) : values[Number(e.target.value)])}>
        {index < 0 ? <option value="">{doc.nullable ? "not set" : "(choose)"}</option> : null}
        {doc.choices.map((c, i) => <option key={c} value={String(i)}>{c}</option>)}
      </select>
    );
  }
  if (doc.type === "number" || doc.type === "integer") {
    return (
      <>
        <TextBox id={id} value={value} numeric placeholder={doc.nullable || doc.optional ? "not set" : "required"} invalid={invalid} onText={(t) => onChange(numberFromText(doc, t))} />
        {localNote}
      </>
    );
  }
  if (doc.type === "string") {
    const multiline = doc.name === "csvGrid" || (typeof value === "string" && value.includes("\n"));
    return (
      <>
        <TextBox id={id} value={value} numeric={false} multiline={multiline} placeholder={doc.optional ? "not set" : "required"} invalid={invalid} onText={(t) => onChange(t === "" && doc.optional ? undefined : t)} />
        {localNote}
      </>
    );
  }
  if (doc.type === "object" && doc.fields) {
    if (value === undefined || value === null) {
      return (
        <div id={id} className="mt-1 flex items-center gap-2 text-sm">
          <span className="muted">Not set.</span>
          <button type="button" className="btn px-2 py-0.5 text-xs" onClick={() => onChange(emptyOf({ ...doc, default: undefined, nullable: false }))}>Set</button>
        </div>
      );
    }
    const obj = value as Item;
    return (
      <fieldset id={id} className="mt-1 rounded-md border border-line bg-panel p-3">
        {doc.optional && doc.default === undefined ? (
          <div className="mb-2 text-right"><button type="button" className="btn px-2 py-0.5 text-xs" onClick={() => onChange(undefined)}>Clear</button></div>
        ) : null}
        <div className="grid gap-x-4 gap-y-2 sm:grid-cols-2">
          {doc.fields.map((f) => (
            <LabelledSetting
              key={f.name}
              id={`${id}-${f.name}`}
              doc={f}
              value={obj[f.name]}
              path={`${path}.${f.name}`}
              errors={errors}
              showKey={false}
              onChange={(v) => {
                const next = { ...obj };
                if (v === undefined) delete next[f.name];
                else next[f.name] = v;
                onChange(next);
              }}
            />
          ))}
        </div>
      </fieldset>
    );
  }
  if (doc.type === "array" && (doc.items || doc.variants)) return <ObjectList id={id} doc={doc} value={value} onChange={onChange} path={path} errors={errors} testKey={testKey} />;
  if (doc.type === "array" && (doc.element || doc.tuple)) return <ValueList id={id} doc={doc} value={value} onChange={onChange} path={path} errors={errors} testKey={testKey} />;
  // A setting whose kind the documentation does not describe: JSON text, checked as it is typed.
  return <JsonBox id={id} value={value} onChange={onChange} />;
}

function JsonBox({ id, value, onChange }: { id: string; value: unknown; onChange: (v: unknown) => void }) {
  const [text, setText] = useState(JSON.stringify(value ?? null));
  const [bad, setBad] = useState(false);
  return (
    <>
      <textarea
        id={id}
        className="field mt-1 h-16 font-mono text-xs"
        value={text}
        aria-invalid={bad}
        onChange={(e) => {
          setText(e.target.value);
          try {
            onChange(JSON.parse(e.target.value));
            setBad(false);
          } catch {
            setBad(true);
          }
        }}
      />
      {bad ? <p className="text-xs text-bad" role="alert">Enter valid JSON.</p> : null}
    </>
  );
}

function ListButtons({ i, n, noun, min, onMove, onRemove }: { i: number; n: number; noun: string; min: number; onMove: (to: number) => void; onRemove: () => void }) {
  return (
    <span className="flex gap-1">
      <button type="button" className="btn px-2 py-0.5 text-xs" onClick={() => onMove(i - 1)} disabled={i === 0} aria-label={`Move ${noun} ${i + 1} up`}>↑ Up</button>
      <button type="button" className="btn px-2 py-0.5 text-xs" onClick={() => onMove(i + 1)} disabled={i === n - 1} aria-label={`Move ${noun} ${i + 1} down`}>↓ Down</button>
      <button type="button" className="btn px-2 py-0.5 text-xs text-bad" onClick={onRemove} disabled={n <= min} aria-label={`Remove ${noun} ${i + 1}`}>Remove</button>
    </span>
  );
}

/** The noun of one item of a list setting ("stages" → "stage"). */
function nounOf(name: string): string {
  const words = readableName(name).words.toLowerCase();
  return /ies$/.test(words) ? words.replace(/ies$/, "y") : /s$/.test(words) && !/ss$/.test(words) ? words.slice(0, -1) : "item";
}

/** A list of objects (one kind, or several told apart by a key) as a list of small forms. */
function ObjectList({ id, doc, value, onChange, path, errors, testKey }: SettingInputProps) {
  const list = Array.isArray(value) ? (value.filter((x) => typeof x === "object" && x !== null) as Item[]) : [];
  const key = testKey ?? path;
  const noun = nounOf(doc.name);
  const min = doc.minItems ?? 0;
  const fieldsOf = (item: Item) => doc.items ?? doc.variants?.find((v) => item[v.key] === v.tag)?.fields ?? doc.variants?.[0]?.fields ?? [];
  const setItem = (i: number, next: Item) => onChange(list.map((it, k) => (k === i ? next : it)));
  const addItem = (tag?: string) => {
    if (doc.variants) {
      const variant = doc.variants.find((v) => v.tag === tag) ?? doc.variants[0];
      const fresh: Item = { [variant.key]: variant.tag };
      for (const f of variant.fields) if (f.name !== variant.key && (!f.optional || f.default !== undefined)) fresh[f.name] = emptyOf(f);
      onChange([...list, fresh]);
    } else onChange([...list, newItem(doc.items!, list)]);
  };
  const [addTag, setAddTag] = useState(doc.variants?.[0]?.tag ?? "");
  return (
    <div id={id} className="mt-1 space-y-2" data-testid={`list-${key}`}>
      <ol className="space-y-2">
        {list.map((item, i) => {
          const variant = doc.variants?.find((v) => item[v.key] === v.tag);
          return (
            <li key={i} className="rounded-md border border-line bg-panel p-3" data-testid={`list-item-${key}-${i}`}>
              <div className="mb-2 flex flex-wrap items-center justify-between gap-2">
                <span className="text-sm font-semibold capitalize">{variant ? variant.tag : noun} {i + 1}</span>
                <ListButtons i={i} n={list.length} noun={noun} min={min} onMove={(to) => onChange(moveItem(list, i, to))} onRemove={() => onChange(removeItem(list, i))} />
              </div>
              <div className="grid gap-x-4 gap-y-2 sm:grid-cols-2 lg:grid-cols-3">
                {fieldsOf(item)
                  .filter((f) => !(variant && f.name === variant.key))
                  .map((f) => (
                    <LabelledSetting
                      key={f.name}
                      id={`${id}-${i}-${f.name}`}
                      doc={f}
                      value={item[f.name]}
                      path={`${path}[${i}].${f.name}`}
                      errors={errors}
                      showKey={false}
                      onChange={(v) => {
                        const next = { ...item };
                        if (v === undefined) delete next[f.name];
                        else next[f.name] = v;
                        setItem(i, next);
                      }}
                    />
                  ))}
              </div>
            </li>
          );
        })}
      </ol>
      {list.length === 0 ? <p className="text-sm muted">None.</p> : null}
      <div className="flex items-center gap-2">
        {doc.variants ? (
          <select className="field w-auto" value={addTag} onChange={(e) => setAddTag(e.target.value)} aria-label={`Kind of ${noun} to add`}>
            {doc.variants.map((v) => <option key={v.tag} value={v.tag}>{v.tag}</option>)}
          </select>
        ) : null}
        <button type="button" className="btn text-sm" onClick={() => addItem(addTag)} data-testid={`list-add-${key}`}>
          + Add a {noun}
        </button>
      </div>
    </div>
  );
}

/** A list of numbers or text, or of fixed-length tuples, as rows of boxes; or a single tuple. */
function ValueList({ id, doc, value, onChange, path, errors, testKey }: SettingInputProps) {
  const key = testKey ?? path;
  if (doc.tuple) {
    // One fixed-length tuple: one box per position.
    const row = Array.isArray(value) ? value : doc.tuple.map(() => undefined);
    return (
      <span id={id} className="flex gap-2">
        {doc.tuple.map((t, k) => (
          <span key={k} className="w-28">
            <SettingInput id={`${id}-${k}`} doc={t} value={row[k]} path={`${path}[${k}]`} errors={errors} onChange={(v) => onChange(row.map((x, j) => (j === k ? v : x)))} />
          </span>
        ))}
      </span>
    );
  }
  const element = doc.element!;
  const list = Array.isArray(value) ? value : [];
  const min = doc.minItems ?? 0;
  return (
    <div id={id} className="mt-1 space-y-1" data-testid={`list-${key}`}>
      <ol className="space-y-1">
        {list.map((v, i) => (
          <li key={i} className="flex items-start gap-2" data-testid={`list-item-${key}-${i}`}>
            <span className="mt-2 w-6 text-right text-xs muted">{i + 1}.</span>
            <span className="min-w-0 flex-1">
              <SettingInput id={`${id}-${i}`} doc={element} value={v} path={`${path}[${i}]`} errors={errors} onChange={(x) => onChange(list.map((y, k) => (k === i ? x : y)))} />
            </span>
            <span className="mt-1">
              <ListButtons i={i} n={list.length} noun="entry" min={min} onMove={(to) => onChange(moveItem(list, i, to))} onRemove={() => onChange(removeItem(list, i))} />
            </span>
          </li>
        ))}
      </ol>
      {list.length === 0 ? <p className="text-sm muted">None.</p> : null}
      <button type="button" className="btn px-2 py-0.5 text-xs" onClick={() => onChange([...list, list.length > 0 ? structuredClone(list[list.length - 1]) : emptyOf(element)])} data-testid={`list-add-${key}`}>
        + Add
      </button>
    </div>
  );
}
