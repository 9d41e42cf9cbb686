"use client";

import Link from "next/link";
import { useRouter } from "next/navigation";
import { useQuery } from "@tanstack/react-query";
import { runQueries } from "@/app/lib/queries";
import { filterToQuery, REVIEW_STATES, REVIEW_WORDS, type RunFilterParams } from "@/app/lib/run-filter";
import type { RunListPage } from "@/app/lib/view-types";
import { DOOR_LABELS, formatDuration, formatTime } from "@/app/ui/format";
import { StatusBadge } from "@/app/ui/status-badge";
import { RUN_STATUS_CHOICES } from "@/app/ui/status-words";

interface Options {
  surveys: Array<{ value: string; label: string }>;
  pipelines: string[];
  people: string[];
}

type SortKey = RunFilterParams["sort"];

function SortHeader({ k, filter, go, children }: { k: SortKey; filter: RunFilterParams; go: (next: Partial<RunFilterParams>) => void; children: React.ReactNode }) {
  const active = filter.sort === k;
  const nextDir = active && filter.dir === "desc" ? "asc" : "desc";
  return (
    <th className="px-3 py-2 font-medium" aria-sort={active ? (filter.dir === "asc" ? "ascending" : "descending") : "none"}>
      <button type="button" className={`inline-flex items-center gap-1 ${active ? "text-ink" : ""}`} onClick={() => go({ sort: k, dir: nextDir, page: 1 })}>
        {children}
        <span aria-hidden className="text-[10px]">{active ? (filter.dir === "asc" ? "▲" : "▼") : "↕"}</span>
      </button>
    </th>
  );
}

/** The runs table: filters in the URL, sorting and paging on the server, live while runs go. */
export function RunsTable({ filter, query, initial, options }: { filter: RunFilterParams; query: string; initial: RunListPage; options: Options }) {
  const router = useRouter();
  const { data } = useQuery(runQueries.list(query, initial));
  const page = data ?? initial;
  const pages = Math.max(1, Math.ceil(page.total / page.pageSize));
  const beyond = page.page > pages;

  const go = (next: Partial<RunFilterParams>) => router.push(`/runs${filterToQuery({ ...filter, ...next })}`);

  function onFilter(event: React.FormEvent<HTMLFormElement>) {
    event.preventDefault();
    const f = new FormData(event.currentTarget);
    const get = (k: string) => (String(f.get(k) ?? "") || undefined) as never;
    go({ survey: get("survey"), pipeline: get("pipeline"), status: get("status"), review: get("review"), person: get("person"), from: get("from"), to: get("to"), page: 1 });
  }

  return (
    <div className="space-y-3">
      {/* Keyed by the filter, so Clear (or any navigation) shows the fields the URL holds, not what was typed before. */}
      <form key={query} onSubmit={onFilter} className="card grid grid-cols-2 gap-3 p-3 md:grid-cols-4 xl:grid-cols-8" aria-label="Filter runs">
        <label className="label">Survey
          <select name="survey" defaultValue={filter.survey ?? ""} className="field mt-1">
            <option value="">All</option>
            {options.surveys.map((s) => <option key={s.value} value={s.value}>{s.label}</option>)}
          </select>
        </label>
        <label className="label">Pipeline
          <select name="pipeline" defaultValue={filter.pipeline ?? ""} className="field mt-1">
            <option value="">All</option>
            {options.pipelines.map((p) => <option key={p} value={p}>{p}</option>)}
          </select>
        </label>
        <label className="label">Status
          <select name="status" defaultValue={filter.status ?? ""} className="field mt-1" data-testid="filter-status">
            <option value="">All</option>
            {RUN_STATUS_CHOICES.map((s) => <option key={s.value} value={s.value}>{s.label}</option>)}
          </select>
        </label>
        <label className="label">Review
          <select name="review" defaultValue={filter.review ?? ""} className="field mt-1" data-testid="filter-review">
            <option value="">Any</option>
            {REVIEW_STATES.map((r) => <option key={r} value={r}>{REVIEW_WORDS[r]}</option>)}
          </select>
        </label>
        <label className="label">Started by
          <input name="person" list="people-list" defaultValue={filter.person ?? ""} className="field mt-1" placeholder="anyone" data-testid="filter-person" />
          <datalist id="people-list">{options.people.map((p) => <option key={p} value={p} />)}</datalist>
        </label>
        <label className="label">From day
          <input type="date" name="from" defaultValue={filter.from ?? ""} className="field mt-1" />
        </label>
        <label className="label">To day
          <input type="date" name="to" defaultValue={filter.to ?? ""} className="field mt-1" />
        </label>
        <div className="flex items-end gap-2">
          <button className="btn-primary" type="submit">Apply</button>
          <button className="btn" type="button" onClick={() => router.push("/runs")} data-testid="filter-clear">Clear</button>
        </div>
      </form>

      <div className="card overflow-x-auto">
        <table className="w-full min-w-[900px] text-sm" data-testid="runs-table">
          <thead className="bg-ground text-left text-xs text-ink-soft">
            <tr>
              <SortHeader k="created" filter={filter} go={go}>Run</SortHeader>
              <SortHeader k="status" filter={filter} go={go}>Status</SortHeader>
              <SortHeader k="pipeline" filter={filter} go={go}>Pipeline</SortHeader>
              <th className="px-3 py-2 font-medium">Survey · dataset</th>
              <th className="px-3 py-2 font-medium">Started by</th>
              <th className="px-3 py-2 font-medium">Steps</th>
              <th className="px-3 py-2 font-medium">Review</th>
              <SortHeader k="duration" filter={filter} go={go}>Duration</SortHeader>
            </tr>
          </thead>
          <tbody>
            {page.rows.length === 0 ? (
              <tr><td colSpan={8} className="px-3 py-10 text-center muted">{beyond ? <>There is no page {page.page}: {page.total} run{page.total === 1 ? "" : "s"} make {pages} page{pages === 1 ? "" : "s"}. <button type="button" className="text-accent hover:underline" onClick={() => go({ page: pages })}>Go to page {pages}</button></> : "No runs match this filter."}</td></tr>
            ) : null}
            {page.rows.map((r) => (
              <tr key={r.id} className="border-t border-line hover:bg-ground/60" data-testid={`run-row-${r.id}`}>
                <td className="px-3 py-2">
                  <Link href={`/runs/${r.id}`} className="font-medium text-accent hover:underline">Run {r.id}</Link>
                  <div className="text-xs muted">{formatTime(r.createdAt)}</div>
                </td>
                <td className="px-3 py-2"><StatusBadge status={r.status} /></td>
                <td className="px-3 py-2">
                  {r.pipelineName} <span className="muted">v{r.pipelineVersion}</span>
                  {r.parentRunId ? <div className="text-xs muted">rerun of run {r.parentRunId}{r.rerunFromStep ? ` from ${r.rerunFromStep}` : ""}</div> : null}
                </td>
                <td className="px-3 py-2">{r.surveyName ?? "—"}<div className="text-xs muted">{r.datasetName}</div></td>
                <td className="px-3 py-2">{r.startedBy}<div className="text-xs muted">via {DOOR_LABELS[r.door]}</div></td>
                <td className="px-3 py-2 tabular-nums">
                  {r.stepsDone}/{r.stepsTotal}
                  {r.cacheHits > 0 ? <span className="ml-1 text-xs muted">({r.cacheHits} reused)</span> : null}
                </td>
                <td className="px-3 py-2 text-xs" data-testid="review-state">
                  {r.review ? (
                    <span className={r.review.decision === "approved" ? "text-ok" : "text-warn"} title={`${formatTime(r.review.at)}`}>
                      {REVIEW_WORDS[r.review.decision]}<span className="block muted">{r.review.reviewer}</span>
                    </span>
                  ) : r.status === "succeeded" ? (
                    <span className="text-accent">{REVIEW_WORDS.awaiting}</span>
                  ) : (
                    <span className="muted">—</span>
                  )}
                </td>
                <td className="px-3 py-2 tabular-nums">{formatDuration(r.durationMs)}</td>
              </tr>
            ))}
          </tbody>
        </table>
      </div>
      <nav className="flex items-center justify-between text-sm" aria-label="Pages">
        <span className="muted" data-testid="page-count">{page.total} run{page.total === 1 ? "" : "s"}{beyond ? "" : ` · page ${page.page} of ${pages}`}</span>
        <div className="flex gap-2">
          <button className="btn" disabled={page.page <= 1} onClick={() => go({ page: Math.min(page.page - 1, pages) })}>Previous</button>
          <button className="btn" disabled={page.page >= pages} onClick={() => go({ page: page.page + 1 })}>Next</button>
        </div>
      </nav>
    </div>
  );
}
