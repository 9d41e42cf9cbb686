"use client";

import { useMemo } from "react";
import { useQueries, useQuery } from "@tanstack/react-query";
import { CartesianGrid, Legend, Line, LineChart, ResponsiveContainer, Tooltip, XAxis, YAxis } from "recharts";
import { artifactQueries } from "@/app/lib/queries";
import { STAGE_COLOURS } from "./misfit-chart";

const MAX_SHOWN = 8;

/**
 * The estimated source wavelet(s) of a wavelet artifact (one single-trace gather per shot, or
 * one "shared"), time in ms, cut to where they carry energy (above 0.5 % of the largest peak).
 */
export function WaveletChart({ hash, fromLabel }: { hash: string; fromLabel: string }) {
  const outline = useQuery(artifactQueries.outline(hash));
  const ids = outline.data?.kind === "gathers" && "gathers" in outline.data ? outline.data.gathers.map((g) => g.id) : [];
  const shown = ids.slice(0, MAX_SHOWN);
  const traces = useQueries({ queries: shown.map((id) => artifactQueries.traces(hash, id)) });
  const ready = traces.length > 0 && traces.every((t) => t.data);

  const data = useMemo(() => {
    if (!ready) return null;
    const series = traces.map((t) => t.data!);
    const first = series[0].header;
    const ns = first.sampleCount;
    let peak = 0;
    for (const s of series) for (let k = 0; k < ns; k++) peak = Math.max(peak, Math.abs(s.payload[k]));
    let lo = ns;
    let hi = 0;
    for (const s of series) {
      for (let k = 0; k < ns; k++) {
        if (Math.abs(s.payload[k]) > 0.005 * peak) {
          lo = Math.min(lo, k);
          hi = Math.max(hi, k);
        }
      }
    }
    if (lo > hi) {
      lo = 0;
      hi = ns - 1;
    }
    const pad = Math.max(4, Math.round((hi - lo) * 0.1));
    lo = Math.max(0, lo - pad);
    hi = Math.min(ns - 1, hi + pad);
    const step = Math.max(1, Math.ceil((hi - lo + 1) / 600));
    const rows: Array<Record<string, number>> = [];
    for (let k = lo; k <= hi; k += step) {
      const row: Record<string, number> = { t: Math.round((first.startTimeS + k * first.sampleIntervalS) * 1e5) / 100 };
      series.forEach((s, i) => (row[shown[i]] = s.payload[k]));
      rows.push(row);
    }
    return rows;
  }, [ready, traces, shown]);

  return (
    <figure className="card p-3" data-testid="wavelet-chart">
      <figcaption className="mb-1 text-xs font-medium text-ink-soft">
        Source wavelet{ids.length > 1 ? "s" : ""} estimated by {fromLabel} ({ids.length === 1 && ids[0] === "shared" ? "one shared by all shots" : `one per shot${ids.length > MAX_SHOWN ? `, first ${MAX_SHOWN} of ${ids.length} shown` : ""}`}); each stage low-passes them like the data
      </figcaption>
      {outline.error ? <p className="text-sm text-bad">{outline.error.message}</p> : null}
      {data ? (
        <div className="h-56">
          <ResponsiveContainer width="100%" height="100%">
            <LineChart data={data} margin={{ top: 8, right: 12, bottom: 24, left: 8 }}>
              <CartesianGrid stroke="#eef0ed" />
              <XAxis dataKey="t" type="number" domain={["dataMin", "dataMax"]} tick={{ fontSize: 10 }} label={{ value: "Time (ms)", position: "insideBottom", offset: -12, fontSize: 10 }} />
              <YAxis tick={{ fontSize: 10 }} width={56} tickFormatter={(v: number) => v.toPrecision(2)} label={{ value: "Amplitude", angle: -90, position: "insideLeft", fontSize: 10 }} />
              <Tooltip formatter={(v) => Number(v).toPrecision(3)} labelFormatter={(t) => `${t} ms`} />
              {shown.length > 1 ? <Legend wrapperStyle={{ fontSize: 10 }} /> : null}
              {shown.map((id, i) => (
                <Line key={id} dataKey={id} name={id === "shared" ? "shared wavelet" : `shot ${id}`} stroke={STAGE_COLOURS[i % STAGE_COLOURS.length]} dot={false} strokeWidth={1.5} isAnimationActive={false} />
              ))}
            </LineChart>
          </ResponsiveContainer>
        </div>
      ) : (
        <p className="py-8 text-center text-xs muted">Loading the wavelets…</p>
      )}
    </figure>
  );
}
