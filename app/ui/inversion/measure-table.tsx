"use client";

import { useQuery } from "@tanstack/react-query";
import { artifactQueries } from "@/app/lib/queries";

interface MeasureRow {
  stage: number;
  lowPassHz: number;
  measure: string;
  startModelMisfit: number;
  finalModelMisfit: number;
  ratio: number;
}

/** Reads the measure table out of an inversion report's data (rows with numbers only). */
export function measureRowsOf(data: unknown): MeasureRow[] {
  const table = (data as { measureTable?: unknown } | null)?.measureTable;
  if (!Array.isArray(table)) return [];
  return table.filter(
    (r): r is MeasureRow =>
      typeof r === "object" && r !== null && ["stage", "lowPassHz", "startModelMisfit", "finalModelMisfit", "ratio"].every((k) => typeof (r as Record<string, unknown>)[k] === "number"),
  );
}

/**
 * The inversion's measure table: the starting and the final model scored with every stage's
 * filter, offsets, window and measure (each with its own re-estimated wavelet), so one can read
 * how much of each stage's misfit the whole inversion removed.
 */
export function MeasureTable({ reportHash }: { reportHash: string }) {
  const outline = useQuery(artifactQueries.outline(reportHash));
  const rows = outline.data && "data" in outline.data ? measureRowsOf(outline.data.data) : [];
  if (outline.error) return <p role="alert" className="text-sm text-bad">{outline.error.message}</p>;
  if (rows.length === 0) return null;
  return (
    <div className="card p-3" data-testid="measure-table">
      <h3 className="mb-1 text-sm font-semibold">Starting against final model, under each stage&apos;s measure</h3>
      <p className="mb-2 text-xs muted">Each model is scored with the stage&apos;s low-pass, offsets, window and measure, with a source wavelet re-estimated for that model, so the wavelet favours neither.</p>
      <table className="w-full text-xs tabular-nums">
        <thead>
          <tr className="text-left muted">
            <th className="py-0.5 pr-3 font-normal">Stage</th>
            <th className="py-0.5 pr-3 font-normal">Measure</th>
            <th className="py-0.5 pr-3 text-right font-normal">Starting model</th>
            <th className="py-0.5 pr-3 text-right font-normal">Final model</th>
            <th className="py-0.5 text-right font-normal">Final / start</th>
          </tr>
        </thead>
        <tbody>
          {rows.map((r) => (
            <tr key={r.stage} className="border-t border-line">
              <td className="py-0.5 pr-3">{r.stage} (to {r.lowPassHz} Hz)</td>
              <td className="py-0.5 pr-3">{r.measure}</td>
              <td className="py-0.5 pr-3 text-right">{r.startModelMisfit.toPrecision(4)}</td>
              <td className="py-0.5 pr-3 text-right">{r.finalModelMisfit.toPrecision(4)}</td>
              <td className="py-0.5 text-right">{(100 * r.ratio).toFixed(0)} %</td>
            </tr>
          ))}
        </tbody>
      </table>
    </div>
  );
}
