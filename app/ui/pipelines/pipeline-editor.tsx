"use client";

import { useState, useTransition } from "react";
import { useRouter } from "next/navigation";
import type { ParamDoc } from "@/pipeline/registry";
import type { EditedStep } from "@/pipeline/pipeline-edit";
import { savePipeline } from "@/app/lib/actions/pipelines";
import { LabelledSetting } from "@/app/ui/rerun/setting-input";
import { moveItem, removeItem } from "@/app/ui/rerun/object-list";

export interface CatalogueEntry {
  id: string;
  title: string;
  description: string;
  defaults: Record<string, unknown>;
}

interface Props {
  pipelineId: number;
  baseVersionId: number;
  baseVersion: number;
  name: string;
  fieldData: string | null;
  geometryTable: string | null;
  initial: { description: string; onBadFile: "stop" | "skip"; steps: EditedStep[] };
  /** Documentation of each step's settings, by step id (from the zod schemas, made on the server). */
  docs: Record<string, ParamDoc[]>;
  catalogue: CatalogueEntry[];
}

type Row = EditedStep & { key: number };

/** A label for a new step of `stepId` that no other step uses. */
function freshLabel(stepId: string, rows: Row[]): string {
  if (!rows.some((r) => r.label === stepId)) return stepId;
  for (let n = 2; ; n++) if (!rows.some((r) => r.label === `${stepId}-${n}`)) return `${stepId}-${n}`;
}

/**
 * The pipeline editor: the steps in order (reorder with the buttons, remove, add from the step
 * catalogue), each step's settings as fields generated from its zod schema. Saving sends the
 * edit to the server, which validates it as a pipeline file (the command line's check) and
 * records a new version; the engine's field error shows beside the field it names.
 */
export function PipelineEditor({ pipelineId, baseVersionId, baseVersion, name, fieldData, geometryTable, initial, docs, catalogue }: Props) {
  const router = useRouter();
  const [description, setDescription] = useState(initial.description);
  const [onBadFile, setOnBadFile] = useState(initial.onBadFile);
  const [rows, setRows] = useState<Row[]>(() => initial.steps.map((s, i) => ({ ...s, key: i })));
  const [nextKey, setNextKey] = useState(initial.steps.length);
  const [open, setOpen] = useState<Set<number>>(() => new Set());
  const [adding, setAdding] = useState(catalogue[0]?.id ?? "");
  const [errors, setErrors] = useState<Record<string, string>>({});
  const [message, setMessage] = useState<{ kind: "error" | "ok"; text: string } | null>(null);
  const [pending, startTransition] = useTransition();

  const change = (next: Row[]) => {
    setRows(next);
    setErrors({});
    setMessage(null);
  };
  const setRow = (i: number, row: Row) => change(rows.map((r, k) => (k === i ? row : r)));
  const toggle = (key: number) => setOpen((o) => {
    const n = new Set(o);
    if (n.has(key)) n.delete(key);
    else n.add(key);
    return n;
  });
  const add = () => {
    const entry = catalogue.find((c) => c.id === adding);
    if (!entry) return;
    const row: Row = { step: entry.id, label: freshLabel(entry.id, rows), settings: structuredClone(entry.defaults), key: nextKey };
    setNextKey(nextKey + 1);
    change([...rows, row]);
    setOpen((o) => new Set(o).add(row.key));
  };

  function save() {
    setMessage(null);
    startTransition(async () => {
      const state = await savePipeline({
        pipelineId,
        baseVersionId,
        description,
        onBadFile,
        steps: rows.map(({ key: _key, ...s }) => {
          void _key;
          return s;
        }),
      });
      if (state.error) {
        setErrors(state.fields ?? {});
        setMessage({ kind: "error", text: state.error });
        // Open the step the error names, so its field shows.
        const m = /^steps\[(\d+)\]/.exec(Object.keys(state.fields ?? {})[0] ?? "");
        if (m && rows[Number(m[1])]) setOpen((o) => new Set(o).add(rows[Number(m[1])].key));
        return;
      }
      if (state.created && state.versionId) router.push(`/pipelines/${pipelineId}?from=${baseVersionId}&to=${state.versionId}`);
      else setMessage({ kind: "ok", text: state.ok ?? "Saved." });
    });
  }

  const stepError = (i: number) => errors[`steps[${i}].step`] ?? errors[`steps[${i}].label`] ?? errors[`steps[${i}]`];
  const addingEntry = catalogue.find((c) => c.id === adding);

  return (
    <div className="space-y-4" data-testid="pipeline-editor">
      <div className="card space-y-3 p-4">
        <p className="text-sm text-ink-soft">
          Editing <span className="font-semibold text-ink">{name}</span> from version {baseVersion}. Saving makes version {baseVersion + 1}; version {baseVersion} stays as it is.
        </p>
        <div className="grid gap-3 md:grid-cols-2">
          <div className="md:col-span-2">
            <label className="label" htmlFor="pipeline-description">Description</label>
            <input id="pipeline-description" className="field mt-1" value={description} onChange={(e) => { setDescription(e.target.value); setMessage(null); }} />
          </div>
          <div>
            <span className="label">Field data</span>
            <p className="mt-1 break-all font-mono text-xs">{fieldData ?? "none (modelling only)"}</p>
          </div>
          <div>
            <span className="label">Geometry table</span>
            <p className="mt-1 break-all font-mono text-xs">{geometryTable ?? "none"}</p>
          </div>
          <div>
            <label className="label" htmlFor="pipeline-on-bad-file">A field file that cannot be read</label>
            <select id="pipeline-on-bad-file" className="field mt-1" value={onBadFile} onChange={(e) => { setOnBadFile(e.target.value as "stop" | "skip"); setMessage(null); }}>
              <option value="stop">stop the run</option>
              <option value="skip">skip it and report it</option>
            </select>
          </div>
        </div>
      </div>

      <ol className="space-y-3" data-testid="editor-steps">
        {rows.map((row, i) => {
          const stepDocs = docs[row.step] ?? [];
          const isOpen = open.has(row.key);
          const err = stepError(i);
          const hasFieldError = Object.keys(errors).some((k) => k.startsWith(`steps[${i}].`));
          return (
            <li key={row.key} className="card p-4" data-testid={`editor-step-${row.label}`} data-step-id={row.step}>
              <div className="flex flex-wrap items-center gap-2">
                <span className="w-6 text-right text-sm muted">{i + 1}.</span>
                <button type="button" className="text-left font-semibold hover:underline" onClick={() => toggle(row.key)} aria-expanded={isOpen} data-testid={`editor-toggle-${row.label}`}>
                  {row.label} <span className="font-normal muted">({row.step})</span>
                </button>
                {hasFieldError ? <span className="rounded bg-bad-soft px-1.5 text-xs text-bad">needs attention</span> : null}
                <span className="ml-auto flex gap-1">
                  <button type="button" className="btn px-2 py-0.5 text-xs" onClick={() => change(moveItem(rows, i, i - 1))} disabled={i === 0} aria-label={`Move ${row.label} up`} data-testid={`editor-up-${row.label}`}>↑ Up</button>
                  <button type="button" className="btn px-2 py-0.5 text-xs" onClick={() => change(moveItem(rows, i, i + 1))} disabled={i === rows.length - 1} aria-label={`Move ${row.label} down`} data-testid={`editor-down-${row.label}`}>↓ Down</button>
                  <button type="button" className="btn px-2 py-0.5 text-xs text-bad" onClick={() => change(removeItem(rows, i))} disabled={rows.length <= 1} aria-label={`Remove ${row.label}`} data-testid={`editor-remove-${row.label}`}>Remove</button>
                </span>
              </div>
              {err ? <p className="mt-1 text-xs text-bad" role="alert" data-testid={`field-error-steps[${i}].step`}>{err}</p> : null}
              {isOpen ? (
                <div className="mt-3 space-y-3 border-t border-line pt-3">
                  <div className="max-w-sm">
                    <label className="label" htmlFor={`label-${row.key}`}>Label <span className="muted">(names the step in runs and inputs)</span></label>
                    <input id={`label-${row.key}`} className="field mt-1" value={row.label} onChange={(e) => setRow(i, { ...row, label: e.target.value })} />
                  </div>
                  {row.input ? (
                    <p className="text-xs muted">Reads {Object.entries(row.input).map(([slot, from]) => `${slot} from ${from}`).join(", ")}.</p>
                  ) : null}
                  <div className="grid gap-x-6 gap-y-3 md:grid-cols-2">
                    {stepDocs.map((d) => (
                      <LabelledSetting
                        key={d.name}
                        id={`s-${row.key}-${d.name}`}
                        doc={d}
                        value={row.settings[d.name]}
                        path={`steps[${i}].settings.${d.name}`}
                        errors={errors}
                        onChange={(v) => {
                          const settings = { ...row.settings };
                          if (v === undefined) delete settings[d.name];
                          else settings[d.name] = v;
                          setRow(i, { ...row, settings });
                        }}
                      />
                    ))}
                    {stepDocs.length === 0 ? <p className="text-sm muted">This step has no settings.</p> : null}
                  </div>
                </div>
              ) : null}
            </li>
          );
        })}
      </ol>

      <div className="card flex flex-wrap items-end gap-3 p-4">
        <div className="min-w-64 flex-1">
          <label className="label" htmlFor="add-step">Add a step from the catalogue</label>
          <select id="add-step" className="field mt-1" value={adding} onChange={(e) => setAdding(e.target.value)} data-testid="add-step">
            {catalogue.map((c) => <option key={c.id} value={c.id}>{c.title} ({c.id})</option>)}
          </select>
          {addingEntry ? <p className="mt-0.5 text-xs muted">{addingEntry.description}</p> : null}
        </div>
        <button type="button" className="btn" onClick={add} data-testid="add-step-button">+ Add at the end</button>
      </div>

      {message ? (
        <p role={message.kind === "error" ? "alert" : "status"} className={message.kind === "error" ? "rounded-md bg-bad-soft px-3 py-2 text-sm text-bad" : "rounded-md bg-accent-soft px-3 py-2 text-sm"} data-testid={message.kind === "error" ? "editor-error" : "editor-status"}>
          {message.text}
        </p>
      ) : null}
      <div className="flex gap-2">
        <button type="button" className="btn-primary" onClick={save} disabled={pending} data-testid="save-pipeline">{pending ? "Checking and saving…" : `Save as version ${baseVersion + 1}`}</button>
        <a href={`/pipelines/${pipelineId}`} className="btn">Cancel</a>
      </div>
    </div>
  );
}
