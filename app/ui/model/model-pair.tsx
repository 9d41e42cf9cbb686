"use client";

import { useMemo, useState } from "react";
import { useQuery } from "@tanstack/react-query";
import { artifactQueries } from "@/app/lib/queries";
import { formatNumber } from "@/app/ui/format";
import { ModelCautions } from "./cautions";
import type { ModelKind } from "./model-kind";
import { FIELDS, fieldRange, ModelSection, type Field } from "./model-section";

export interface ModelChoice {
  key: string;
  hash: string;
  kind: ModelKind;
  /** e.g. "build-model, run 12". */
  source: string;
}

/** One colour scale for several models: the smallest low and largest high of their ranges. */
export function sharedScale(ranges: Array<{ lo: number; hi: number }>): { lo: number; hi: number } | undefined {
  if (ranges.length === 0) return undefined;
  return { lo: Math.min(...ranges.map((r) => r.lo)), hi: Math.max(...ranges.map((r) => r.hi)) };
}

/**
 * Two models side by side on the same colour scale and property, so equal colours mean equal
 * values: choose each from `choices` (e.g. the starting and the inverted model, or two runs').
 */
export function ModelPair({ choices, initial, positionsHash }: { choices: ModelChoice[]; initial: [string, string]; positionsHash?: string }) {
  const [keys, setKeys] = useState<[string, string]>(initial);
  const [field, setField] = useState<Field>("vs");
  const left = choices.find((c) => c.key === keys[0]) ?? choices[0];
  const right = choices.find((c) => c.key === keys[1]) ?? choices.at(-1)!;
  const ma = useQuery(artifactQueries.model(left.hash));
  const mb = useQuery(artifactQueries.model(right.hash));
  const scale = useMemo(() => {
    const r = [ma.data, mb.data].filter((d) => d !== undefined).map((d) => fieldRange(d.payload, d.header.nx, d.header.nz, field));
    return r.length === 2 ? sharedScale(r) : undefined;
  }, [ma.data, mb.data, field]);
  return (
    <div className="space-y-3" data-testid="model-pair">
      <div className="flex flex-wrap items-end gap-3 text-sm">
        {([0, 1] as const).map((i) => (
          <label key={i} className="label">{i === 0 ? "Left" : "Right"}
            <select className="field mt-1 w-auto" value={keys[i]} onChange={(e) => setKeys((k) => (i === 0 ? [e.target.value, k[1]] : [k[0], e.target.value]))} data-testid={`model-pair-${i}`}>
              {choices.map((c) => <option key={c.key} value={c.key}>{c.source}</option>)}
            </select>
          </label>
        ))}
        {scale ? (
          <p className="text-xs text-ink-soft" data-testid="shared-scale">
            One colour scale for both: {FIELDS[field].symbol} {formatNumber(Math.round(scale.lo), FIELDS[field].unit)} to {formatNumber(Math.round(scale.hi), FIELDS[field].unit)}.
          </p>
        ) : null}
      </div>
      <div className="grid gap-4 lg:grid-cols-2">
        <ModelSection hash={left.hash} kind={left.kind} source={left.source} positionsHash={positionsHash} scale={scale} field={field} onFieldChange={setField} cautions={false} />
        <ModelSection hash={right.hash} kind={right.kind} source={right.source} positionsHash={positionsHash} scale={scale} field={field} onFieldChange={setField} cautions={false} />
      </div>
      {[left.kind, right.kind].some((k) => k.kind === "inverted") ? <ModelCautions model={right.kind.kind === "inverted" ? right.kind : left.kind} compact /> : <ModelCautions model={left.kind} compact />}
    </div>
  );
}
