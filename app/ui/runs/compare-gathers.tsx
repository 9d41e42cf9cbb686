"use client";

import type { RunView } from "@/app/lib/view-types";
import { GatherViewer, type GatherSource } from "@/app/ui/traces/gather-viewer";

function sourcesOf(run: RunView, tag: string): GatherSource[] {
  const seen = new Set<string>();
  const out: GatherSource[] = [];
  for (const s of run.steps) {
    for (const slot of ["gathers", "synthetic"]) {
      const hash = s.outputs[slot];
      if (!hash || seen.has(hash)) continue;
      seen.add(hash);
      out.push({ key: `${tag}:${s.label}:${slot}`, label: `run ${run.id}, ${slot === "gathers" ? "after" : "synthetic from"} ${s.label}`, hash });
    }
  }
  return out;
}

/** The same gather from two runs, side by side, flipping or with the difference. */
export function CompareGathers({ a, b }: { a: RunView; b: RunView }) {
  const sa = sourcesOf(a, "a");
  const sb = sourcesOf(b, "b");
  const lastA = [...sa].reverse().find((s) => s.key.endsWith(":gathers"));
  const lastB = [...sb].reverse().find((s) => s.key.endsWith(":gathers"));
  if (!lastA || !lastB) return null;
  return (
    <section className="card p-4" aria-label="Gathers of both runs">
      <h2 className="mb-3">Gathers of both runs</h2>
      <GatherViewer sources={[...sa, ...sb]} initialA={lastA.key} initialB={lastB.key} initialMode="difference" />
    </section>
  );
}
