/**
 * Grids on the model's mesh as binary for the inversion view: an elastic model (Vs, Vp,
 * density, through {@link modelWire}) or an inversion gradient (one grid per inverted
 * parameter). Same wire and layout as the model route (app/lib/artifacts.ts modelWire, see
 * trace-wire.ts), with the artifact's kind in the header.
 */
import { AppError } from "@/pipeline/errors";
import type { ElasticModel } from "@/pipeline/types";
import { loadArtifact } from "./artifacts";
import { encodeWire } from "./trace-wire";

/** Header of the field answer. */
export interface FieldWireHeader {
  kind: "model" | "gradient";
  nx: number;
  nz: number;
  spacingM: number;
  originX: number;
  originZ: number;
  /** Names of the grids in the payload, in order, each flat `[z][x]`. */
  fields: string[];
}

interface GradientDocument {
  kind: "gradient";
  nx: number;
  nz: number;
  spacingM: number;
  originX: number;
  originZ: number;
  parameters: string[];
  [name: string]: unknown;
}

/** A model or gradient artifact as binary float32 grids. */
export async function fieldWire(hash: string): Promise<Uint8Array> {
  const value = (await loadArtifact(hash)) as { kind?: unknown };
  if (value?.kind === "model") {
    // The model route's bytes (modelWire) with the kind added to the header.
    const m = value as ElasticModel;
    const header: FieldWireHeader = { kind: "model", nx: m.nx, nz: m.nz, spacingM: m.spacingM, originX: m.originX, originZ: m.originZ, fields: ["vs", "vp", "rho"] };
    return encodeWire(header, [m.vs, m.vp, m.rho]);
  }
  if (value?.kind === "gradient") {
    const g = value as GradientDocument;
    const n = g.nx * g.nz;
    const arrays = g.parameters.map((p) => {
      const a = g[p] as ArrayLike<number> | undefined;
      if (!a || typeof a !== "object" || a.length !== n) {
        throw new AppError("bad-input", `Gradient ${hash.slice(0, 12)}…: parameter "${p}" has no grid of ${g.nx} × ${g.nz} cells.`, { field: "hash" });
      }
      return a instanceof Float32Array ? a : Float32Array.from(a);
    });
    const header: FieldWireHeader = { kind: "gradient", nx: g.nx, nz: g.nz, spacingM: g.spacingM, originX: g.originX, originZ: g.originZ, fields: [...g.parameters] };
    return encodeWire(header, arrays);
  }
  throw new AppError("bad-input", `Artifact ${hash.slice(0, 12)}… holds ${String(value?.kind ?? "unknown")}; fields come from a model or a gradient.`, { field: "hash" });
}
