import type { Metadata } from "next";
import Link from "next/link";
import { idSchema } from "@/app/lib/api";
import { pageUserWith } from "@/app/lib/page-user";
import { readRun, readRunList } from "@/app/lib/reads";
import type { RunView } from "@/app/lib/view-types";
import { formatReadable, readableName } from "@/app/ui/format";
import { modelKindOf } from "@/app/ui/model/model-kind";
import { ModelPair, type ModelChoice } from "@/app/ui/model/model-pair";
import { statusWord } from "@/app/ui/status-words";
import { StatusBadge } from "@/app/ui/status-badge";
import { CompareGathers } from "@/app/ui/runs/compare-gathers";

export const metadata: Metadata = { title: "Compare settings" };
export const dynamic = "force-dynamic";

function rowsOf(a: RunView, b: RunView) {
  const labels = [...new Set([...a.steps.map((s) => s.label), ...b.steps.map((s) => s.label)])];
  return labels.map((label) => {
    const sa = a.steps.find((s) => s.label === label);
    const sb = b.steps.find((s) => s.label === label);
    const names = [...new Set([...Object.keys(sa?.params ?? {}), ...Object.keys(sb?.params ?? {})])];
    return {
      label,
      stepA: sa ? `${sa.stepId} v${sa.stepVersion}` : "—",
      stepB: sb ? `${sb.stepId} v${sb.stepVersion}` : "—",
      params: names.map((n) => {
        const { words, unit } = readableName(n);
        const va = sa ? formatReadable(sa.params[n], unit) : "—";
        const vb = sb ? formatReadable(sb.params[n], unit) : "—";
        const differs = JSON.stringify(sa?.params[n]) !== JSON.stringify(sb?.params[n]);
        return { name: n, words, a: va, b: vb, differs };
      }),
      outputsDiffer: JSON.stringify(sa?.outputs ?? {}) !== JSON.stringify(sb?.outputs ?? {}),
    };
  });
}

/** The models a run wrote, each with its kind. */
function modelsOf(run: RunView): ModelChoice[] {
  const out: ModelChoice[] = [];
  for (const s of run.steps) {
    const hash = s.outputs.model;
    if (!hash || out.some((m) => m.hash === hash)) continue;
    out.push({ key: `${run.id}:${s.label}`, hash, kind: modelKindOf(s.stepId, s.summary), source: `${s.label}, run ${run.id}` });
  }
  return out;
}

export default async function ComparePage({ searchParams }: { searchParams: Promise<{ a?: string; b?: string; all?: string }> }) {
  await pageUserWith("runs.read");
  const sp = await searchParams;
  const ia = idSchema.safeParse(sp.a);
  const ib = idSchema.safeParse(sp.b);
  const a = ia.success ? readRun(ia.data) : null;
  const b = ib.success ? readRun(ib.data) : null;
  const recent = readRunList({ page: 1, pageSize: 100 }).rows;
  const showAll = sp.all === "1";
  return (
    <div className="space-y-5">
      <div>
        <h1>Compare settings</h1>
        <p className="text-ink-soft">The settings of two runs side by side, step by step, and their gathers before and after.</p>
      </div>
      <form className="card flex flex-wrap items-end gap-3 p-3" aria-label="Choose two runs">
        {(["a", "b"] as const).map((k) => (
          <label key={k} className="label">{k === "a" ? "First run" : "Second run"}
            <select name={k} defaultValue={(k === "a" ? sp.a : sp.b) ?? ""} className="field mt-1 w-auto">
              <option value="">choose…</option>
              {recent.map((r) => <option key={r.id} value={r.id}>Run {r.id} · {r.pipelineName} v{r.pipelineVersion} · {statusWord(r.status)} · {r.startedBy}{r.parentRunId ? ` · rerun of ${r.parentRunId}` : ""}</option>)}
            </select>
          </label>
        ))}
        <label className="flex items-center gap-1 text-xs text-ink-soft"><input type="checkbox" name="all" value="1" defaultChecked={showAll} /> show unchanged settings too</label>
        <button className="btn-primary">Compare</button>
      </form>
      {(sp.a && !a) || (sp.b && !b) ? <p role="alert" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad">No run with id {sp.a && !a ? sp.a : sp.b}.</p> : null}
      {a && b ? (
        <>
          <section className="card overflow-x-auto" aria-label="Settings side by side">
            <table className="w-full text-sm" data-testid="param-diff">
              <thead className="bg-ground text-left text-xs text-ink-soft">
                <tr>
                  <th className="px-3 py-2 font-medium">Step · setting</th>
                  <th className="px-3 py-2 font-medium"><Link href={`/runs/${a.id}`} className="text-accent hover:underline">Run {a.id}</Link> <StatusBadge status={a.status} /></th>
                  <th className="px-3 py-2 font-medium"><Link href={`/runs/${b.id}`} className="text-accent hover:underline">Run {b.id}</Link> <StatusBadge status={b.status} /></th>
                </tr>
              </thead>
              <tbody>
                {rowsOf(a, b).map((row) => {
                  const shown = showAll ? row.params : row.params.filter((p) => p.differs);
                  return [
                    <tr key={row.label} className="border-t border-line bg-ground/40">
                      <td className="px-3 py-1.5 font-medium">{row.label}</td>
                      <td className="px-3 py-1.5 text-xs muted">{row.stepA}</td>
                      <td className="px-3 py-1.5 text-xs muted">{row.stepB}{row.outputsDiffer ? <span className="ml-2 rounded bg-accent-soft px-1 text-accent">different result</span> : <span className="ml-2 muted">same result</span>}</td>
                    </tr>,
                    ...shown.map((p) => (
                      <tr key={`${row.label}.${p.name}`} className={`border-t border-line/60 ${p.differs ? "bg-warn-soft" : ""}`} data-differs={p.differs ? "yes" : "no"}>
                        <td className="px-3 py-1 pl-6 text-xs">{p.words}<span className="block font-mono text-[10px] text-ink-faint">{p.name}</span></td>
                        <td className="px-3 py-1 text-xs tabular-nums">{p.a}</td>
                        <td className="px-3 py-1 text-xs tabular-nums">{p.b}</td>
                      </tr>
                    )),
                  ];
                })}
              </tbody>
            </table>
          </section>
          <CompareGathers a={a} b={b} />
          {modelsOf(a).length + modelsOf(b).length >= 2 ? (
            <section className="card p-4" aria-label="Models of both runs">
              <h2 className="mb-2">Models side by side</h2>
              <ModelPair choices={[...modelsOf(a), ...modelsOf(b)]} initial={[(modelsOf(a).at(-1) ?? modelsOf(b)[0]).key, (modelsOf(b).at(-1) ?? modelsOf(a)[0]).key]} />
            </section>
          ) : null}
        </>
      ) : (
        <p className="muted">Choose two runs to compare.</p>
      )}
    </div>
  );
}
