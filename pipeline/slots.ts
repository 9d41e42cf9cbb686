/**
 * The slot table of an executing run. Every step's outputs are kept under the step that wrote
 * them (its label), and the latest value of each slot is what a step reads by default. A step
 * whose pipeline entry names an input (`input: { gathers: frequency-filter#1 }`, resolved to a
 * label when the file is read) reads that step's output instead. Values are decoded from the
 * artifact store once, when a step first needs them.
 */
import fs from "node:fs";
import path from "node:path";
import type { Db } from "../db/client";
import { getDataset, listDatasetFiles } from "../db/queries/datasets";
import { readArtifactSync } from "./artifact-store";
import { AppError } from "./errors";
import { sha256Hex } from "./hash";
import type { AnyStepDefinition } from "./step";
import type { FieldFileSet, SlotName, SlotValues } from "./types";

interface SlotEntry {
  hash: string;
  load: () => unknown;
}

export class SlotTable {
  private readonly latest = new Map<SlotName, SlotEntry>();
  private readonly byStep = new Map<string, Map<SlotName, SlotEntry>>();
  private readonly decoded = new Map<string, unknown>();
  /** Values not read from the artifact store (the dataset's field files), by hash. */
  private readonly entries = new Map<string, SlotEntry>();

  /** A slot the runner fills itself (field files, geometry table). */
  setRunnerSlot(slot: SlotName, hash: string, load?: () => unknown): void {
    if (load) {
      let value: unknown;
      this.entries.set(hash, { hash, load: () => (value ??= load()) });
    }
    this.latest.set(slot, this.artifact(hash));
  }

  /** Records the outputs (slot → artifact hash) of the step labelled `label`; `values` are already decoded ones. */
  recordOutputs(label: string, outputs: Record<string, string>, values?: Partial<SlotValues>): void {
    const mine = new Map<SlotName, SlotEntry>();
    for (const [slot, hash] of Object.entries(outputs) as Array<[SlotName, string]>) {
      if (values?.[slot] !== undefined) this.decoded.set(hash, values[slot]);
      const entry = this.artifact(hash);
      mine.set(slot, entry);
      this.latest.set(slot, entry);
    }
    this.byStep.set(label, mine);
  }

  /**
   * The artifact hash of each slot `step` reads: from the step named in `explicit` (slot →
   * label), else the latest value. Throws when a required slot has no value.
   */
  resolveInputs(label: string, step: AnyStepDefinition, explicit: Record<string, string> | undefined): Record<string, string> {
    const inputs: Record<string, string> = {};
    const pick = (slot: SlotName, required: boolean) => {
      const from = explicit?.[slot];
      const entry = from === undefined ? this.latest.get(slot) : this.byStep.get(from)?.get(slot);
      if (entry) inputs[slot] = entry.hash;
      else if (from !== undefined) {
        throw new AppError("bad-input", `Step ${label} reads "${slot}" from ${from}, which wrote no ${slot} in this run`, { field: label });
      } else if (required) {
        throw new AppError("bad-input", `Step ${label} needs "${slot}", which no earlier step provided`, { field: label });
      }
    };
    for (const slot of step.reads) pick(slot, true);
    for (const slot of step.optionalReads ?? []) pick(slot, false);
    return inputs;
  }

  /** The decoded values of resolved inputs. */
  load(inputs: Record<string, string>): Partial<SlotValues> {
    const input: Record<string, unknown> = {};
    for (const [slot, hash] of Object.entries(inputs)) input[slot] = this.artifact(hash).load();
    return input as Partial<SlotValues>;
  }

  private artifact(hash: string): SlotEntry {
    const own = this.entries.get(hash);
    if (own) return own;
    return {
      hash,
      load: () => {
        if (!this.decoded.has(hash)) this.decoded.set(hash, readArtifactSync(hash));
        return this.decoded.get(hash);
      },
    };
  }
}

/** The files of a recorded dataset, each checked against the hash recorded with it. */
export function loadFieldFiles(db: Db, datasetId: number): FieldFileSet {
  const ds = getDataset(db, datasetId);
  if (!ds) throw new AppError("not-found", `Dataset ${datasetId} does not exist`);
  const files = listDatasetFiles(db, datasetId).map((f) => {
    const full = path.join(ds.folderPath, f.name);
    let bytes: Buffer;
    try {
      bytes = fs.readFileSync(full);
    } catch {
      throw new AppError("conflict", `Field file ${full} has gone since the dataset was recorded`, { file: full });
    }
    const sha = sha256Hex(bytes);
    if (sha !== f.sha256) {
      throw new AppError("conflict", `Field file ${full} changed since the dataset was recorded; start a new run to use the new content`, {
        file: full,
      });
    }
    return { name: f.name, sha256: sha, bytes: new Uint8Array(bytes.buffer, bytes.byteOffset, bytes.byteLength) };
  });
  return { kind: "field-files", files };
}
