/**
 * The record × channel grid of a field check, drawn as SVG on the server: one cell per trace,
 * coloured by verdict and marked with a letter (blank ok, W warn, R reshoot) so it does not rely on
 * colour alone; hovering a cell shows its reasons. The record verdict heads each row and the
 * channel verdicts make the last row.
 */
import type { FieldCheckReport } from "@/pipeline/steps/field-check";

const CELL = 14;
const LEFT = 92;
const TOP = 34;
const FILL = ["#e4f2e9", "#fbf0de", "#f8e5e2"];
const INK = ["#2f7a4f", "#a4620f", "#b23a2e"];
const LETTER = ["", "W", "R"];
const RANK: Record<string, number> = { ok: 0, warn: 1, reshoot: 2 };

export function VerdictGrid({ report }: { report: FieldCheckReport }) {
  const nc = report.channels.length;
  const ns = report.shots.length;
  const reasons = new Map(report.cells.map((c) => [`${c.shot}:${c.channel}`, c.reasons]));
  const width = LEFT + (nc + 1) * CELL + 8;
  const height = TOP + (ns + 1) * CELL + CELL + 8;
  return (
    <svg
      role="img"
      aria-label={`Verdict per record and channel: ${report.counts.reshoot} traces to reshoot, ${report.counts.warn} with warnings, of ${report.counts.traces}`}
      width={width}
      height={height}
      viewBox={`0 0 ${width} ${height}`}
      className="font-mono"
      data-testid="verdict-grid"
    >
      {report.channels.map((ch, c) =>
        c % 2 === 0 || nc <= 24 ? (
          <text key={ch} x={LEFT + c * CELL + CELL / 2} y={TOP - 6} fontSize={8} textAnchor="middle" fill="#4a5559">
            {ch}
          </text>
        ) : null,
      )}
      <text x={LEFT} y={10} fontSize={9} fill="#4a5559">channel →</text>
      <text x={LEFT + nc * CELL + CELL / 2} y={TOP - 6} fontSize={8} textAnchor="middle" fill="#4a5559">rec</text>
      {report.shots.map((s, r) => {
        const y = TOP + r * CELL;
        const sv = RANK[s.verdict];
        return (
          <g key={s.gatherId}>
            <text x={LEFT - 4} y={y + CELL - 3} fontSize={9} textAnchor="end" fill={INK[sv]} fontWeight={sv > 0 ? 700 : 400}>
              {s.gatherId}
            </text>
            {report.channels.map((ch, c) => {
              const v = report.grid[r * nc + c];
              if (v < 0) return null;
              const why = reasons.get(`${r}:${ch}`);
              return (
                <g key={ch}>
                  <rect x={LEFT + c * CELL} y={y} width={CELL - 1} height={CELL - 1} fill={FILL[v]}>
                    <title>{`${s.gatherId}, channel ${ch}: ${["ok", "warn", "reshoot"][v]}${why ? ` (${why.join("; ")})` : ""}`}</title>
                  </rect>
                  {v > 0 ? (
                    <text x={LEFT + c * CELL + (CELL - 1) / 2} y={y + CELL - 4} fontSize={9} textAnchor="middle" fill={INK[v]} pointerEvents="none">
                      {LETTER[v]}
                    </text>
                  ) : null}
                </g>
              );
            })}
            <rect x={LEFT + nc * CELL + 2} y={y} width={CELL - 1} height={CELL - 1} fill={FILL[sv]} stroke={INK[sv]} strokeWidth={0.5}>
              <title>{`${s.gatherId} (${s.file}): ${s.verdict}${s.reasons.length ? ` (${s.reasons.join("; ")})` : ""}`}</title>
            </rect>
            {sv > 0 ? (
              <text x={LEFT + nc * CELL + 2 + (CELL - 1) / 2} y={y + CELL - 4} fontSize={9} textAnchor="middle" fill={INK[sv]} pointerEvents="none">
                {LETTER[sv]}
              </text>
            ) : null}
          </g>
        );
      })}
      <text x={LEFT - 4} y={TOP + ns * CELL + CELL + 1} fontSize={9} textAnchor="end" fill="#4a5559">channel</text>
      {report.channelVerdicts.map((cv, c) => {
        const v = RANK[cv.verdict];
        const y = TOP + ns * CELL + 4;
        return (
          <g key={cv.channel}>
            <rect x={LEFT + c * CELL} y={y} width={CELL - 1} height={CELL - 1} fill={FILL[v]} stroke={INK[v]} strokeWidth={0.5}>
              <title>{`channel ${cv.channel}: ${cv.verdict}${cv.reasons.length ? ` (${cv.reasons.join("; ")})` : ""}`}</title>
            </rect>
            {v > 0 ? (
              <text x={LEFT + c * CELL + (CELL - 1) / 2} y={y + CELL - 4} fontSize={9} textAnchor="middle" fill={INK[v]} pointerEvents="none">
                {LETTER[v]}
              </text>
            ) : null}
          </g>
        );
      })}
    </svg>
  );
}

/** The legend: colour and letter of each verdict. */
export function VerdictLegend() {
  return (
    <ul className="flex flex-wrap gap-4 text-sm" aria-label="Legend">
      {(["ok", "warn", "reshoot"] as const).map((v, i) => (
        <li key={v} className="flex items-center gap-1.5">
          <span className="inline-flex h-4 w-4 items-center justify-center rounded-sm font-mono text-[10px]" style={{ background: FILL[i], color: INK[i] }}>
            {LETTER[i]}
          </span>
          {v === "ok" ? "ok (blank)" : v === "warn" ? "W: warning, worth a look" : "R: reshoot or put right before the crew leaves"}
        </li>
      ))}
    </ul>
  );
}
