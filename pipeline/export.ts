/**
 * Turning artifacts into files people can open elsewhere: gathers as SEG-Y rev 2.0 (IEEE
 * float), models as CSV grids (x, z, vp, vs, rho), anything else as JSON.
 */
import type { ElasticModel, GatherSet } from "./types";
import { writeGatherSetAsSegy } from "./io/segy";

export type ExportFormat = "segy" | "csv" | "json";

/** The natural export format of a slot value. */
export function exportFormatOf(value: unknown): ExportFormat {
  const kind = (value as { kind?: string })?.kind;
  if (kind === "gathers") return "segy";
  if (kind === "model") return "csv";
  return "json";
}

/** A model as CSV: one row per cell, x and z of the cell centre-node in metres. */
export function modelToCsv(m: ElasticModel): string {
  const lines = ["x_m,z_m,vp_m_per_s,vs_m_per_s,rho_kg_per_m3"];
  for (let iz = 0; iz < m.nz; iz++) {
    const z = m.originZ + iz * m.spacingM;
    for (let ix = 0; ix < m.nx; ix++) {
      const i = iz * m.nx + ix;
      const x = m.originX + ix * m.spacingM;
      lines.push(`${+x.toFixed(4)},${+z.toFixed(4)},${+m.vp[i].toFixed(3)},${+m.vs[i].toFixed(3)},${+m.rho[i].toFixed(3)}`);
    }
  }
  return `${lines.join("\n")}\n`;
}

function toJson(value: unknown): string {
  return JSON.stringify(
    value,
    (_k, v) => (ArrayBuffer.isView(v) && !(v instanceof DataView) ? Array.from(v as unknown as ArrayLike<number>) : v),
    2,
  );
}

/** Encodes a slot value in `format` (default: its natural format). */
export function exportArtifact(value: unknown, format: ExportFormat = exportFormatOf(value), title = "Tracewright export"): Uint8Array {
  if (format === "segy") {
    if ((value as { kind?: string })?.kind !== "gathers") throw new TypeError("only gathers can be written as SEG-Y");
    return writeGatherSetAsSegy(value as GatherSet, { title });
  }
  if (format === "csv") {
    if ((value as { kind?: string })?.kind !== "model") throw new TypeError("only models can be written as CSV");
    return new TextEncoder().encode(modelToCsv(value as ElasticModel));
  }
  return new TextEncoder().encode(toJson(value));
}
