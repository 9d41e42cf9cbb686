"use client";

import { useMemo, useState, type ReactNode } from "react";
import { useQueries, useQuery } from "@tanstack/react-query";
import { CartesianGrid, Line, LineChart, ResponsiveContainer, Tooltip, XAxis, YAxis } from "recharts";
import { artifactQueries } from "@/app/lib/queries";
import { STAGE_COLOURS } from "./misfit-chart";

const MAX_SHOWN = 8;
/** One colour per drawn shot: the stage colours and two more, so no two of the eight repeat. */
const COLOURS = [...STAGE_COLOURS, "#b8336a", "#2a8f8f"];

/** One set of wavelets the inversion view can draw: the starting ones, or those of a stage. */
export interface WaveletChoice {
  key: string;
  /** Short name in the chooser. */
  label: string;
  hash: string;
  /** What the wavelets are (the chart adds how many). */
  caption: string;
}

/**
 * The wavelets of an inversion: a chooser between the starting wavelets and each stage's (the
 * newest shown until another is chosen), and the chart of the chosen ones.
 */
export function WaveletPanel({ choices }: { choices: readonly WaveletChoice[] }) {
  const [key, setKey] = useState<string | null>(null);
  const shown = choices.find((c) => c.key === key) ?? choices[choices.length - 1];
  if (!shown) return null;
  const chooser =
    choices.length > 1 ? (
      <label className="flex items-center gap-2 text-xs">
        <span className="muted">Wavelets of</span>
        <select className="input py-0.5 text-xs" value={shown.key} onChange={(e) => setKey(e.target.value)} data-testid="wavelet-choice">
          {choices.map((c) => (
            <option key={c.key} value={c.key}>
              {c.label}
            </option>
          ))}
        </select>
      </label>
    ) : null;
  return <WaveletChart hash={shown.hash} caption={shown.caption} control={chooser} />;
}

/**
 * The source wavelet(s) of a wavelet artifact (one single-trace gather per shot, or one
 * "shared"), time in ms, cut to where they carry energy (above 0.5 % of the largest peak).
 */
export function WaveletChart({ hash, caption, control }: { hash: string; caption: string; control?: ReactNode }) {
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
      <figcaption className="mb-1 flex flex-wrap items-start justify-between gap-2 text-xs font-medium text-ink-soft">
        <span>
          {caption} ({ids.length === 1 && ids[0] === "shared" ? "one shared by all shots" : `one per shot${ids.length > MAX_SHOWN ? `, first ${MAX_SHOWN} of ${ids.length} shown` : ""}`})
        </span>
        {control}
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
              {shown.map((id, i) => (
                <Line key={id} dataKey={id} name={id === "shared" ? "shared wavelet" : `shot ${id}`} stroke={COLOURS[i % COLOURS.length]} dot={false} strokeWidth={1.5} isAnimationActive={false} />
              ))}
            </LineChart>
          </ResponsiveContainer>
        </div>
      ) : (
        <p className="py-8 text-center text-xs muted">Loading the wavelets…</p>
      )}
      {data && shown.length > 1 ? (
        <ul className="mt-1 flex flex-wrap gap-x-3 gap-y-1 text-[10px] text-ink-soft" aria-label="Shots drawn">
          {shown.map((id, i) => (
            <li key={id} className="flex items-center gap-1">
              <span aria-hidden className="inline-block h-0.5 w-3" style={{ background: COLOURS[i % COLOURS.length] }} />
              {id === "shared" ? "shared wavelet" : `shot ${id}`}
            </li>
          ))}
        </ul>
      ) : null}
    </figure>
  );
}
