"use client";

import { useQuery } from "@tanstack/react-query";
import { Bar, BarChart, CartesianGrid, Cell, Legend, Line, LineChart, ResponsiveContainer, Tooltip, XAxis, YAxis } from "recharts";
import { artifactQueries } from "@/app/lib/queries";
import type { StepView } from "@/app/lib/view-types";

const PALETTE = ["#1f5f8b", "#d0611b", "#2f7a4f", "#7a4fa1", "#a4620f", "#4a5559"];

/** Step durations as bars; reused (cache-hit) steps in a lighter colour. */
export function StepDurationsChart({ steps }: { steps: StepView[] }) {
  const data = steps.map((s) => ({ label: s.label, seconds: (s.durationMs ?? 0) / 1000, reused: s.cacheHit }));
  return (
    <div className="h-56" data-testid="durations-chart">
      <ResponsiveContainer width="100%" height="100%">
        <BarChart data={data} margin={{ top: 8, right: 8, bottom: 36, left: 8 }}>
          <CartesianGrid stroke="#eef0ed" vertical={false} />
          <XAxis dataKey="label" tick={{ fontSize: 10 }} angle={-25} textAnchor="end" interval={0} />
          <YAxis tick={{ fontSize: 10 }} label={{ value: "s", angle: -90, position: "insideLeft", fontSize: 10 }} />
          <Tooltip formatter={(v, _n, p) => [`${Number(v).toFixed(2)} s${(p.payload as { reused: boolean }).reused ? " (reused)" : ""}`, "duration"]} />
          <Bar dataKey="seconds" isAnimationActive={false}>
            {data.map((d) => <Cell key={d.label} fill={d.reused ? "#a9c4d6" : "#1f5f8b"} />)}
          </Bar>
        </BarChart>
      </ResponsiveContainer>
    </div>
  );
}

/** Any curve a step records (e.g. misfit per iteration), one line per group. */
export function StepSeriesChart({ series }: { series: StepView["series"][number] }) {
  const groups = [...new Set(series.points.map((p) => p.group ?? series.name))];
  const byX = new Map<number, Record<string, number>>();
  for (const p of series.points) {
    const row = byX.get(p.x) ?? { x: p.x };
    row[p.group ?? series.name] = p.y;
    byX.set(p.x, row);
  }
  const data = [...byX.values()].sort((a, b) => a.x - b.x);
  return (
    <figure className="card p-3" data-testid={`series-${series.name}`}>
      <figcaption className="mb-1 text-xs font-medium text-ink-soft">{series.name}</figcaption>
      <div className="h-56">
        <ResponsiveContainer width="100%" height="100%">
          <LineChart data={data} margin={{ top: 8, right: 12, bottom: 24, left: 8 }}>
            <CartesianGrid stroke="#eef0ed" />
            <XAxis dataKey="x" type="number" domain={["dataMin", "dataMax"]} tick={{ fontSize: 10 }} label={{ value: series.xLabel, position: "insideBottom", offset: -12, fontSize: 10 }} />
            <YAxis tick={{ fontSize: 10 }} width={56} label={{ value: series.yLabel, angle: -90, position: "insideLeft", fontSize: 10 }} />
            <Tooltip />
            {groups.length > 1 ? <Legend wrapperStyle={{ fontSize: 10 }} /> : null}
            {groups.map((g, i) => (
              <Line key={g} dataKey={g} stroke={PALETTE[i % PALETTE.length]} dot={data.length < 40} strokeWidth={1.8} isAnimationActive={false} connectNulls />
            ))}
          </LineChart>
        </ResponsiveContainer>
      </div>
    </figure>
  );
}

/** Mean amplitude spectra of a spectra artifact, all gathers on one chart. */
export function SpectrumChart({ hash }: { hash: string }) {
  const q = useQuery(artifactQueries.spectra(hash));
  if (q.error) return <p className="text-sm text-bad">{q.error.message}</p>;
  if (!q.data) return <p className="text-sm muted">Loading spectra…</p>;
  const { frequenciesHz, gathers } = q.data;
  const shown = gathers.slice(0, 6);
  const data = frequenciesHz.map((f, i) => {
    const row: Record<string, number> = { f };
    for (const g of shown) row[g.gatherId] = g.mean[i];
    return row;
  });
  return (
    <figure className="card p-3" data-testid="spectrum-chart">
      <figcaption className="mb-1 text-xs font-medium text-ink-soft">Mean amplitude spectrum{gathers.length > shown.length ? ` (first ${shown.length} of ${gathers.length} gathers)` : ""}</figcaption>
      <div className="h-56">
        <ResponsiveContainer width="100%" height="100%">
          <LineChart data={data} margin={{ top: 8, right: 12, bottom: 24, left: 8 }}>
            <CartesianGrid stroke="#eef0ed" />
            <XAxis dataKey="f" type="number" domain={[0, "dataMax"]} tick={{ fontSize: 10 }} label={{ value: "frequency (Hz)", position: "insideBottom", offset: -12, fontSize: 10 }} />
            <YAxis tick={{ fontSize: 10 }} width={56} label={{ value: "amplitude", angle: -90, position: "insideLeft", fontSize: 10 }} />
            <Tooltip />
            <Legend wrapperStyle={{ fontSize: 10 }} />
            {shown.map((g, i) => <Line key={g.gatherId} dataKey={g.gatherId} stroke={PALETTE[i % PALETTE.length]} dot={false} strokeWidth={1.4} isAnimationActive={false} />)}
          </LineChart>
        </ResponsiveContainer>
      </div>
    </figure>
  );
}
