"use client";

import { useMemo, useState } from "react";
import type { StepView } from "@/app/lib/view-types";
import { formatNumber } from "@/app/ui/format";
import { niceDomain, niceTicks, tickLabel } from "./ticks";
import { useElementWidth } from "@/app/ui/use-element-width";

/** A series group name "sp07 (flagged)" → shot "sp07", flagged; "sp07 (hand)" → shot "sp07", a hand pick. */
export function parseGroup(group: string | undefined, fallback: string): { shot: string; flagged: boolean; hand: boolean } {
  const g = group ?? fallback;
  const m = /^(.*) \((flagged|hand)\)$/.exec(g);
  return m ? { shot: m[1], flagged: m[2] === "flagged", hand: m[2] === "hand" } : { shot: g, flagged: false, hand: false };
}

const capital = (t: string) => t.charAt(0).toUpperCase() + t.slice(1);

const M = { left: 52, right: 12, top: 10, bottom: 34 };
const H = 300;

/**
 * A series with many groups, one group at a time against the others in grey. For first-arrival
 * picks: picks against offset as a travel-time plot (time increasing upward, offset
 * across, as refraction travel-time curves are drawn): the chosen shot in colour (joined good
 * picks, flagged picks as open red circles), the other shots as faint dots; choose a shot from
 * the list or by hovering a pick.
 */
export function TravelTimeChart({ series }: { series: StepView["series"][number] }) {
  const picks = series.name === "first-arrivals";
  const xTitle = picks ? "Offset (m)" : capital(series.xLabel);
  const yTitle = picks ? "First-arrival time (ms)" : capital(series.yLabel);
  const points = useMemo(() => series.points.map((p) => ({ x: p.x, y: p.y, ...parseGroup(p.group, series.name) })), [series]);
  const shots = useMemo(() => [...new Set(points.map((p) => p.shot))], [points]);
  const [shot, setShot] = useState<string>("");
  const [hover, setHover] = useState<{ x: number; y: number; shot: string; flagged: boolean; hand: boolean } | null>(null);
  const active = shot || shots[0] || "";
  const [wrap, width] = useElementWidth();

  const [x0, x1] = niceDomain(Math.min(...points.map((p) => p.x)), Math.max(...points.map((p) => p.x)), 8);
  const ys = points.map((p) => p.y).filter(Number.isFinite);
  const [y0, y1] = niceDomain(Math.min(0, ...ys), Math.max(...ys, 0) || 1, 5);
  const pw = Math.max(50, width - M.left - M.right);
  const ph = H - M.top - M.bottom;
  const px = (x: number) => M.left + ((x - x0) / (x1 - x0 || 1)) * pw;
  const py = (y: number) => M.top + ph - ((y - y0) / (y1 - y0 || 1)) * ph;
  const mine = points.filter((p) => p.shot === active);
  const good = mine.filter((p) => !p.flagged).sort((a, b) => a.x - b.x);
  const flaggedCount = points.filter((p) => p.flagged).length;
  const handCount = points.filter((p) => p.hand).length;

  return (
    <figure className="card min-w-0 p-3 lg:col-span-2" data-testid={`series-${series.name}`}>
      <figcaption className="mb-1 flex flex-wrap items-center justify-between gap-2 text-xs">
        <span className="font-medium text-ink-soft">{picks ? "First-arrival picks · travel time against offset" : `${series.name.replace(/-/g, " ")} · one gather at a time`}</span>
        <label className="flex items-center gap-1 text-ink-soft">
          {picks ? "Shot" : "Gather"}
          <select className="field w-auto py-0.5 text-xs" value={active} onChange={(e) => setShot(e.target.value)} data-testid="travel-time-shot">
            {shots.map((s) => <option key={s} value={s}>{s}</option>)}
          </select>
        </label>
      </figcaption>
      <div ref={wrap} className="w-full">
        {width > 0 ? (
          <svg width={width} height={H} role="img" aria-label={`${yTitle} against ${xTitle}, ${active}`} onMouseLeave={() => setHover(null)}>
            {niceTicks(y0, y1, 5).map((t) => (
              <g key={`y${t}`}>
                <line x1={M.left} x2={M.left + pw} y1={py(t)} y2={py(t)} stroke="#eef0ed" />
                <text x={M.left - 6} y={py(t)} textAnchor="end" dominantBaseline="middle" fontSize={10} fill="#4a5559">{tickLabel(t)}</text>
              </g>
            ))}
            {niceTicks(x0, x1, 8).map((t) => (
              <g key={`x${t}`}>
                <line x1={px(t)} x2={px(t)} y1={M.top} y2={M.top + ph} stroke="#eef0ed" />
                <text x={px(t)} y={M.top + ph + 14} textAnchor="middle" fontSize={10} fill="#4a5559">{tickLabel(t)}</text>
              </g>
            ))}
            <rect x={M.left + 0.5} y={M.top + 0.5} width={pw - 1} height={ph - 1} fill="none" stroke="#4a5559" />
            <text x={M.left + pw / 2} y={H - 4} textAnchor="middle" fontSize={11} fill="#4a5559">{xTitle}</text>
            <text transform={`translate(12 ${M.top + ph / 2}) rotate(-90)`} textAnchor="middle" fontSize={11} fill="#4a5559">{yTitle}</text>
            {points.filter((p) => p.shot !== active).map((p, i) => (
              <circle key={i} cx={px(p.x)} cy={py(p.y)} r={1.6} fill="#9aa3a6" opacity={0.45} onMouseEnter={() => setHover(p)} onClick={() => setShot(p.shot)} style={{ cursor: "pointer" }} />
            ))}
            {good.length > 1 ? <polyline points={good.map((p) => `${px(p.x)},${py(p.y)}`).join(" ")} fill="none" stroke="#1f5f8b" strokeWidth={1.2} /> : null}
            {mine.map((p, i) =>
              p.hand ? (
                <rect key={`m${i}`} x={px(p.x) - 3.5} y={py(p.y) - 3.5} width={7} height={7} fill="#2f7a4f" stroke="#fff" strokeWidth={0.8} onMouseEnter={() => setHover(p)} data-testid="hand-pick" />
              ) : p.flagged ? (
                <circle key={`m${i}`} cx={px(p.x)} cy={py(p.y)} r={3.5} fill="#fff" stroke="#b23a2e" strokeWidth={1.4} onMouseEnter={() => setHover(p)} />
              ) : (
                <circle key={`m${i}`} cx={px(p.x)} cy={py(p.y)} r={3} fill="#1f5f8b" onMouseEnter={() => setHover(p)} />
              ),
            )}
            {hover ? (
              <g pointerEvents="none">
                <rect x={Math.min(px(hover.x) + 8, M.left + pw - 170)} y={Math.max(M.top, py(hover.y) - 30)} width={165} height={22} rx={3} fill="#ffffff" stroke="#c9cfcc" />
                <text x={Math.min(px(hover.x) + 14, M.left + pw - 164)} y={Math.max(M.top, py(hover.y) - 30) + 15} fontSize={10} fill="#1c2326">
                  {hover.shot}: {formatNumber(hover.x, picks ? "m" : null, 3)}, {formatNumber(hover.y, picks ? "ms" : null, 3)}{hover.flagged ? " (flagged)" : hover.hand ? " (by hand)" : ""}
                </text>
              </g>
            ) : null}
          </svg>
        ) : (
          <div style={{ height: H }} />
        )}
      </div>
      <ul className="mt-1 flex flex-wrap gap-x-4 text-[11px] text-ink-soft" aria-label="Legend">
        <li><span className="mr-1 inline-block h-2 w-2 rounded-full bg-[#1f5f8b] align-middle" />{picks ? "picks of" : "values of"} {active}</li>
        {flaggedCount ? <li><span className="mr-1 inline-block h-2 w-2 rounded-full border border-[#b23a2e] align-middle" />flagged off the trend ({mine.filter((p) => p.flagged).length} here, {flaggedCount} of {points.length} in all)</li> : null}
        {handCount ? <li><span className="mr-1 inline-block h-2 w-2 bg-[#2f7a4f] align-middle" />picked by hand ({mine.filter((p) => p.hand).length} here, {handCount} in all)</li> : null}
        <li><span className="mr-1 inline-block h-1.5 w-1.5 rounded-full bg-[#9aa3a6] align-middle" />other {picks ? "shots" : "gathers"} (click one to choose it)</li>
      </ul>
    </figure>
  );
}
