"use client";

import { useState, useTransition, type ReactNode } from "react";
import { useRouter } from "next/navigation";
import { closestCenter, DndContext, KeyboardSensor, PointerSensor, useSensor, useSensors, type DragEndEvent, type UniqueIdentifier } from "@dnd-kit/core";
import { SortableContext, sortableKeyboardCoordinates, useSortable, verticalListSortingStrategy } from "@dnd-kit/sortable";
import { CSS } from "@dnd-kit/utilities";
import type { ParamDoc } from "@/pipeline/registry";
import type { EditedStep } from "@/pipeline/pipeline-edit";
import { savePipeline } from "@/app/lib/actions/pipelines";
import { LabelledSetting } from "@/app/ui/rerun/setting-input";
import { moveItem, removeItem } from "@/app/ui/rerun/object-list";
import { reorderByDrop, stepsWithErrors } from "./step-order";

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

/** The sortable id of a row (dnd-kit treats a falsy id such as 0 as none, so ids are strings). */
const sortId = (row: { key: number }) => `step-${row.key}`;

/**
 * One step of the list, sortable: dragged by its handle with the pointer, or with the keyboard
 * (focus the handle, Space or Enter to pick it up, arrow keys, Space or Enter to drop, Escape to cancel).
 */
function SortableStep({ row, children }: { row: Row; children: (handle: ReactNode) => ReactNode }) {
  const { attributes, listeners, setNodeRef, setActivatorNodeRef, transform, transition, isDragging } = useSortable({ id: sortId(row) });
  const handle = (
    <button
      type="button"
      ref={setActivatorNodeRef}
      className="btn cursor-grab touch-none px-1.5 py-0.5 text-xs"
      {...attributes}
      {...listeners}
      aria-label={`Drag ${row.label} to another place (keyboard: Space, then the arrow keys, then Space)`}
      title="Drag to reorder"
      data-testid={`editor-drag-${row.label}`}
    >
      ⠿
    </button>
  );
  return (
    <li
      ref={setNodeRef}
      style={{ transform: CSS.Translate.toString(transform), transition, position: "relative", zIndex: isDragging ? 10 : undefined }}
      className={`card p-4 ${isDragging ? "shadow-lg ring-2 ring-accent" : ""}`}
      data-testid={`editor-step-${row.label}`}
      data-step-id={row.step}
    >
      {children(handle)}
    </li>
  );
}

/**
 * The pipeline editor: the steps in order (reorder by dragging a step's handle, with the keyboard
 * on the handle, or with the Up/Down buttons; remove; add from the step catalogue), each step's
 * settings as fields generated from its zod schema. Saving sends the edit to the server, which
 * validates it as a pipeline file (the command line's check, going on past the first problem) and
 * records a new version; every problem found shows beside the field it names.
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
  const sensors = useSensors(
    // A few pixels of movement before a drag starts, so a click on the handle stays a click.
    useSensor(PointerSensor, { activationConstraint: { distance: 4 } }),
    useSensor(KeyboardSensor, { coordinateGetter: sortableKeyboardCoordinates }),
  );
  const labelOf = (id: UniqueIdentifier) => rows.find((r) => sortId(r) === String(id))?.label ?? String(id);
  const onDragEnd = ({ active, over }: DragEndEvent) => {
    const next = reorderByDrop(rows, active.id, over?.id, sortId);
    if (next !== rows) change([...next]);
  };

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
        // Open every step a problem names, so each field error shows.
        const named = stepsWithErrors(state.fields ?? {}).filter((i) => rows[i]);
        if (named.length > 0) setOpen((o) => new Set([...o, ...named.map((i) => rows[i].key)]));
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

      <DndContext
        id="pipeline-editor-steps"
        sensors={sensors}
        collisionDetection={closestCenter}
        onDragEnd={onDragEnd}
        accessibility={{
          screenReaderInstructions: { draggable: "To move a step, press Space or Enter on its handle, move it with the arrow keys, and press Space or Enter to drop it there, or Escape to cancel." },
          announcements: {
            onDragStart: ({ active }) => `Picked up ${labelOf(active.id)}.`,
            onDragOver: ({ active, over }) => (over ? `${labelOf(active.id)} is at the place of ${labelOf(over.id)}.` : `${labelOf(active.id)} is outside the list.`),
            onDragEnd: ({ active, over }) => (over ? `${labelOf(active.id)} moved to the place of ${labelOf(over.id)}.` : `${labelOf(active.id)} left where it was.`),
            onDragCancel: ({ active }) => `Moving ${labelOf(active.id)} cancelled; it stays where it was.`,
          },
        }}
      >
      <SortableContext items={rows.map(sortId)} strategy={verticalListSortingStrategy}>
      <ol className="space-y-3" data-testid="editor-steps">
        {rows.map((row, i) => {
          const stepDocs = docs[row.step] ?? [];
          const isOpen = open.has(row.key);
          const err = stepError(i);
          const hasFieldError = Object.keys(errors).some((k) => k.startsWith(`steps[${i}].`));
          return (
            <SortableStep key={row.key} row={row}>
              {(handle) => (<>
              <div className="flex flex-wrap items-center gap-2">
                {handle}
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
              </>)}
            </SortableStep>
          );
        })}
      </ol>
      </SortableContext>
      </DndContext>

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
          {message.text.split("\n")[0]}
          {message.text.includes("\n") ? (
            <span className="mt-1 block">
              {message.text.split("\n").slice(1).map((line) => (
                <span key={line} className="block pl-3 -indent-3" data-testid="editor-problem">• {line}</span>
              ))}
            </span>
          ) : null}
        </p>
      ) : null}
      <div className="flex gap-2">
        <button type="button" className="btn-primary" onClick={save} disabled={pending} data-testid="save-pipeline">{pending ? "Checking and saving…" : `Save as version ${baseVersion + 1}`}</button>
        <a href={`/pipelines/${pipelineId}`} className="btn">Cancel</a>
      </div>
    </div>
  );
}
