"use client";

import { useMemo, useState } from "react";
import { CartesianGrid, Legend, Line, LineChart, ReferenceLine, ResponsiveContainer, Tooltip, XAxis, YAxis } from "recharts";
import { stageSegments, type SeriesPoint } from "./inversion-data";

export const STAGE_COLOURS = ["#1f5f8b", "#d0611b", "#2f7a4f", "#7a4fa1", "#a4620f", "#4a5559"];

/**
 * The misfit over iterations, one line per frequency stage. A stage's first point is the
 * accepted model measured in the new stage's band, so the curve jumps there; the jump is drawn
 * as a dashed vertical segment and the stage start is marked. Linear or logarithmic misfit axis.
 */
export function MisfitChart({
  points,
  withLastWavelet = [],
  currentIteration,
}: {
  points: SeriesPoint[];
  /** Stage starts measured with the last stage's wavelet (series "misfit-with-last-wavelet"). */
  withLastWavelet?: SeriesPoint[];
  currentIteration?: number | null;
}) {
  const [log, setLog] = useState(false);
  const stages = useMemo(() => stageSegments(points, withLastWavelet), [points, withLastWavelet]);
  const all = [...stages.flatMap((s) => s.points), ...stages.flatMap((s) => (s.jump?.withLastWavelet !== undefined ? [{ x: s.jump.x, y: s.jump.withLastWavelet }] : []))];
  const positive = all.every((p) => p.y > 0);
  const useLog = log && positive;
  const ys = all.map((p) => p.y);
  const yMin = Math.min(...ys);
  const yMax = Math.max(...ys);
  const domain: [number, number] = useLog ? [yMin / 1.15, yMax * 1.15] : [Math.max(0, yMin - 0.05 * (yMax - yMin || yMax)), yMax + 0.05 * (yMax - yMin || yMax)];
  const xMax = Math.max(1, ...all.map((p) => p.x));

  return (
    <figure className="card p-3" data-testid="misfit-chart">
      <figcaption className="mb-1 flex flex-wrap items-center justify-between gap-2">
        <span className="text-xs font-medium text-ink-soft">Misfit over iterations, by frequency stage</span>
        <label className="flex items-center gap-1 text-xs">
          <input type="checkbox" checked={log} onChange={(e) => setLog(e.target.checked)} disabled={!positive} data-testid="misfit-log" />
          Logarithmic misfit axis
        </label>
      </figcaption>
      {all.length === 0 ? (
        <p className="py-10 text-center text-sm muted">No misfit yet: the first value is written when the first stage starts.</p>
      ) : (
        <div className="h-64">
          <ResponsiveContainer width="100%" height="100%">
            <LineChart margin={{ top: 16, right: 16, bottom: 24, left: 8 }}>
              <CartesianGrid stroke="#eef0ed" />
              <XAxis
                dataKey="x"
                type="number"
                domain={[0, xMax]}
                allowDecimals={false}
                tick={{ fontSize: 10 }}
                label={{ value: "Iteration (all stages)", position: "insideBottom", offset: -12, fontSize: 10 }}
              />
              <YAxis
                dataKey="y"
                type="number"
                scale={useLog ? "log" : "linear"}
                domain={domain}
                allowDataOverflow
                tick={{ fontSize: 10 }}
                tickFormatter={(v: number) => v.toPrecision(3)}
                width={60}
                label={{ value: useLog ? "Misfit (log scale)" : "Misfit", angle: -90, position: "insideLeft", fontSize: 10 }}
              />
              <Tooltip
                formatter={(v) => Number(v).toPrecision(4)}
                labelFormatter={(x) => `iteration ${x}`}
              />
              <Legend verticalAlign="top" wrapperStyle={{ fontSize: 10, paddingBottom: 4 }} />
              {stages.map((s, i) =>
                s.jump ? (
                  <ReferenceLine
                    key={`start-${s.group}`}
                    x={s.startX}
                    stroke="#8a9397"
                    strokeDasharray="2 3"
                    label={{ value: `stage ${s.stage}${s.lowPassHz !== null ? ` · ${s.lowPassHz} Hz` : ""}`, position: "insideTopRight", fontSize: 10, fill: STAGE_COLOURS[i % STAGE_COLOURS.length] }}
                  />
                ) : null,
              )}
              {stages.map((s, i) =>
                s.jump ? (
                  <Line
                    key={`jump-${s.group}`}
                    data={[{ x: s.jump.x, y: s.jump.from }, ...(s.jump.withLastWavelet !== undefined ? [{ x: s.jump.x, y: s.jump.withLastWavelet }] : []), { x: s.jump.x, y: s.jump.to }]}
                    dataKey="y"
                    stroke={STAGE_COLOURS[i % STAGE_COLOURS.length]}
                    strokeDasharray="4 3"
                    dot={false}
                    legendType="none"
                    name={`jump into stage ${s.stage}`}
                    isAnimationActive={false}
                  />
                ) : null,
              )}
              {stages.map((s, i) =>
                s.jump?.withLastWavelet !== undefined ? (
                  <Line
                    key={`last-wavelet-${s.group}`}
                    data={[{ x: s.jump.x, y: s.jump.withLastWavelet }]}
                    dataKey="y"
                    stroke={STAGE_COLOURS[i % STAGE_COLOURS.length]}
                    dot={{ r: 4, fill: "#fff", strokeWidth: 1.5 }}
                    legendType="none"
                    name={`stage ${s.stage} start with the last stage's wavelet`}
                    isAnimationActive={false}
                  />
                ) : null,
              )}
              {stages.map((s, i) => (
                <Line
                  key={s.group}
                  data={s.points}
                  dataKey="y"
                  name={s.group}
                  stroke={STAGE_COLOURS[i % STAGE_COLOURS.length]}
                  strokeWidth={1.8}
                  dot={{ r: 2.5 }}
                  isAnimationActive={false}
                />
              ))}
              {currentIteration !== null && currentIteration !== undefined ? (
                <ReferenceLine x={currentIteration} stroke="#1c2326" strokeWidth={1} strokeOpacity={0.5} />
              ) : null}
            </LineChart>
          </ResponsiveContainer>
        </div>
      )}
      <p className="mt-1 text-xs muted">
        Each stage measures the misfit in its own frequency band, so the curve jumps where a stage starts (dashed): the same model, measured with more of the data. Where a
        stage re-estimates the wavelet, a hollow dot marks its start measured with the last stage&apos;s wavelet (the wider band and offsets alone); from there the new wavelet
        takes it to the stage&apos;s first point, which can lie lower than the last stage ended when the new wavelet explains the data better.
        {stages.length ? ` ${stages.length} stage${stages.length > 1 ? "s" : ""} so far.` : ""}
      </p>
    </figure>
  );
}
