"use client";

import { useMemo, useState } from "react";
import { useQuery } from "@tanstack/react-query";
import { Bar, BarChart, CartesianGrid, Cell, Line, LineChart, ResponsiveContainer, Tooltip, XAxis, YAxis } from "recharts";
import { artifactQueries } from "@/app/lib/queries";
import type { StepView } from "@/app/lib/view-types";
import { formatNumber } from "@/app/ui/format";
import { niceDomain, niceTicks, tickLabel } from "./ticks";
import { TravelTimeChart } from "./travel-time-chart";

export const PALETTE = ["#1f5f8b", "#d0611b", "#2f7a4f", "#7a4fa1", "#a4620f", "#4a5559"];

/** Above this many groups a line chart with one colour per group is unreadable: choose instead. */
const MANY_GROUPS = 8;

const TICK = { fontSize: 10, fill: "#4a5559" };

/**
 * A chart's frame: the y-axis title above the plot (never cut or overlapped), the x-axis title
 * under it, and the legend as wrapping text inside the card.
 */
export function ChartFrame({
  title,
  xLabel,
  yLabel,
  legend,
  controls,
  footer,
  children,
  testId,
}: {
  title: string;
  xLabel: string;
  yLabel: string;
  legend?: Array<{ label: string; colour: string; dashed?: boolean }>;
  controls?: React.ReactNode;
  footer?: React.ReactNode;
  children: React.ReactNode;
  testId?: string;
}) {
  return (
    <figure className="card min-w-0 p-3" data-testid={testId}>
      <figcaption className="mb-1 flex flex-wrap items-center justify-between gap-2 text-xs">
        <span className="font-medium text-ink-soft">{title}</span>
        {controls}
      </figcaption>
      <p className="text-[11px] text-ink-soft">↑ {yLabel}</p>
      <div className="h-56">{children}</div>
      <p className="text-center text-[11px] text-ink-soft">{xLabel} →</p>
      {legend && legend.length ? (
        <ul className="mt-1 flex flex-wrap gap-x-3 gap-y-0.5 text-[11px] text-ink-soft" aria-label="Legend">
          {legend.map((l) => (
            <li key={l.label} className="flex items-center gap-1">
              <span className="inline-block h-0.5 w-4" style={{ background: l.dashed ? `repeating-linear-gradient(to right, ${l.colour} 0 3px, transparent 3px 5px)` : l.colour }} />
              {l.label}
            </li>
          ))}
        </ul>
      ) : null}
      {footer}
    </figure>
  );
}

/** Step durations as bars; reused (cache-hit) steps in a lighter colour. */
export function StepDurationsChart({ steps }: { steps: StepView[] }) {
  const data = steps.map((s) => ({ label: s.label, seconds: (s.durationMs ?? 0) / 1000, reused: s.cacheHit }));
  return (
    <ChartFrame
      title="Step durations"
      xLabel="step"
      yLabel="duration (s)"
      legend={[{ label: "computed", colour: "#1f5f8b" }, { label: "result reused", colour: "#a9c4d6" }]}
      testId="durations-chart"
    >
      <ResponsiveContainer width="100%" height="100%">
        <BarChart data={data} margin={{ top: 8, right: 8, bottom: 36, left: 0 }}>
          <CartesianGrid stroke="#eef0ed" vertical={false} />
          <XAxis dataKey="label" tick={TICK} angle={-25} textAnchor="end" interval={0} />
          <YAxis tick={TICK} width={44} tickFormatter={tickLabel} />
          <Tooltip formatter={(v, _n, p) => [`${formatNumber(Number(v), "s", 3)}${(p.payload as { reused: boolean }).reused ? " (reused)" : ""}`, "duration"]} />
          <Bar dataKey="seconds" isAnimationActive={false}>
            {data.map((d) => <Cell key={d.label} fill={d.reused ? "#a9c4d6" : "#1f5f8b"} />)}
          </Bar>
        </BarChart>
      </ResponsiveContainer>
    </ChartFrame>
  );
}

/** Any curve a step records (e.g. misfit per iteration), one line per group; many groups (picks per shot) as a travel-time plot. */
export function StepSeriesChart({ series }: { series: StepView["series"][number] }) {
  const groups = [...new Set(series.points.map((p) => p.group ?? series.name))];
  if (series.name === "first-arrivals" || groups.length > MANY_GROUPS) return <TravelTimeChart series={series} />;
  const byX = new Map<number, Record<string, number>>();
  for (const p of series.points) {
    const row = byX.get(p.x) ?? { x: p.x };
    row[p.group ?? series.name] = p.y;
    byX.set(p.x, row);
  }
  const data = [...byX.values()].sort((a, b) => a.x - b.x);
  const xLo = data[0]?.x ?? 0;
  const xHi = data.at(-1)?.x ?? 1;
  return (
    <ChartFrame
      title={series.name.replace(/-/g, " ")}
      xLabel={series.xLabel}
      yLabel={series.yLabel}
      legend={groups.length > 1 ? groups.map((g, i) => ({ label: g, colour: PALETTE[i % PALETTE.length] })) : undefined}
      testId={`series-${series.name}`}
    >
      <ResponsiveContainer width="100%" height="100%">
        <LineChart data={data} margin={{ top: 8, right: 12, bottom: 4, left: 0 }}>
          <CartesianGrid stroke="#eef0ed" />
          <XAxis dataKey="x" type="number" domain={[xLo, xHi]} ticks={niceTicks(xLo, xHi, 6).filter((t) => t >= xLo && t <= xHi)} tick={TICK} tickFormatter={tickLabel} />
          <YAxis tick={TICK} width={48} tickFormatter={tickLabel} domain={["auto", "auto"]} />
          <Tooltip formatter={(v, n) => [formatNumber(Number(v), null, 4), n]} labelFormatter={(x) => `${series.xLabel}: ${formatNumber(Number(x), null, 4)}`} />
          {groups.map((g, i) => (
            <Line key={g} dataKey={g} stroke={PALETTE[i % PALETTE.length]} dot={data.length < 40} strokeWidth={1.8} isAnimationActive={false} connectNulls />
          ))}
        </LineChart>
      </ResponsiveContainer>
    </ChartFrame>
  );
}

/** Default gathers shown in a spectrum chart: the first, the middle and the last. */
function defaultChoice(ids: string[]): string[] {
  if (ids.length <= 3) return ids;
  return [ids[0], ids[Math.floor(ids.length / 2)], ids[ids.length - 1]];
}

/**
 * Mean amplitude spectra (|X(f)|·Δt, averaged over a gather's live traces) of any gathers of a
 * spectra artifact: choose the gathers (up to six), linear or logarithmic amplitude.
 */
export function SpectrumChart({ hash, title = "Mean amplitude spectrum" }: { hash: string; title?: string }) {
  const q = useQuery(artifactQueries.spectra(hash));
  const [chosen, setChosen] = useState<string[] | null>(null);
  const [log, setLog] = useState(false);
  const ids = useMemo(() => q.data?.gathers.map((g) => g.gatherId) ?? [], [q.data]);
  const shown = (chosen ?? defaultChoice(ids)).filter((id) => ids.includes(id));
  const data = useMemo(() => {
    if (!q.data) return [];
    const byId = new Map(q.data.gathers.map((g) => [g.gatherId, g.mean]));
    return q.data.frequenciesHz.map((f, i) => {
      const row: Record<string, number | null> = { f };
      for (const id of shown) {
        const v = byId.get(id)?.[i] ?? null;
        // A logarithmic axis cannot show zero: leave such points out rather than draw them at the floor.
        row[id] = v === null || (log && !(v > 0)) ? null : v;
      }
      return row;
    });
  }, [q.data, shown, log]);
  if (q.error) return <p className="text-sm text-bad">{q.error.message}</p>;
  if (!q.data) return <p className="text-sm muted">Loading spectra…</p>;
  const maxF = q.data.frequenciesHz.at(-1) ?? 1;
  let maxA = 0;
  for (const row of data) for (const id of shown) maxA = Math.max(maxA, row[id] ?? 0);
  const yTop = niceDomain(0, maxA || 1, 5)[1];
  const toggle = (id: string) => setChosen((c) => {
    const cur = c ?? defaultChoice(ids);
    return cur.includes(id) ? cur.filter((x) => x !== id) : [...cur, id].slice(-6);
  });
  return (
    <ChartFrame
      title={title}
      xLabel="frequency (Hz)"
      yLabel={`mean amplitude (data unit × s)${log ? ", logarithmic" : ""}`}
      legend={shown.map((id, i) => ({ label: id, colour: PALETTE[i % PALETTE.length] }))}
      testId="spectrum-chart"
      footer={
        <div className="mt-2 flex flex-wrap gap-1" role="group" aria-label="Gathers shown (up to six)">
          {ids.map((id) => (
            <button
              key={id}
              type="button"
              aria-pressed={shown.includes(id)}
              onClick={() => toggle(id)}
              className={`rounded px-1.5 py-0.5 text-[10px] ${shown.includes(id) ? "bg-accent text-white" : "border border-line bg-panel text-ink-soft"}`}
            >
              {id}
            </button>
          ))}
        </div>
      }
      controls={
        <label className="flex items-center gap-1 text-ink-soft">
          <input type="checkbox" checked={log} onChange={(e) => setLog(e.target.checked)} data-testid="spectrum-log" /> logarithmic amplitude
        </label>
      }
    >
      <ResponsiveContainer width="100%" height="100%">
        <LineChart data={data} margin={{ top: 8, right: 12, bottom: 4, left: 0 }}>
          <CartesianGrid stroke="#eef0ed" />
          <XAxis dataKey="f" type="number" domain={[0, maxF]} ticks={niceTicks(0, maxF, 6)} tick={TICK} tickFormatter={tickLabel} />
          {log ? (
            <YAxis tick={TICK} width={52} tickFormatter={tickLabel} scale="log" domain={["auto", "auto"]} />
          ) : (
            <YAxis tick={TICK} width={52} tickFormatter={tickLabel} domain={[0, yTop]} ticks={niceTicks(0, yTop, 5)} />
          )}
          <Tooltip formatter={(v, n) => [formatNumber(Number(v), null, 3), n]} labelFormatter={(f) => `${formatNumber(Number(f), "Hz", 3)}`} />
          {shown.map((id, i) => <Line key={id} dataKey={id} stroke={PALETTE[i % PALETTE.length]} dot={false} strokeWidth={1.4} isAnimationActive={false} connectNulls={false} />)}
        </LineChart>
      </ResponsiveContainer>
    </ChartFrame>
  );
}
