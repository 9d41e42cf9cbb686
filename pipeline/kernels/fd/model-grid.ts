/**
 * Elastic model grids: built from a description (layers with vertical gradients, and shapes with
 * their own properties), imported from or exported to CSV (columns x, z, vp, vs, rho).
 * Grids are flat row-major `[z][x]` (see ElasticModel in pipeline/types.ts). Units: m, m/s, kg/m³.
 */
import type { ElasticModel } from "../../types";
import { AppError } from "../../errors";

/** Elastic properties; any left out of a shape keep the background value. */
export interface CellProperties {
  /** P velocity, m/s. */
  vp?: number;
  /** S velocity, m/s. */
  vs?: number;
  /** Density, kg/m³. */
  rho?: number;
}

/** A layer from `topM` down to the next layer's top, with values at its top and vertical gradients. */
export interface LayerDescription {
  /** Depth of the layer's top, m. */
  topM: number;
  vp: number;
  vs: number;
  rho: number;
  /** Increase with depth below the layer top, (m/s)/m. Default 0. */
  vpGradient?: number;
  vsGradient?: number;
  /** Increase of density with depth, (kg/m³)/m. Default 0. */
  rhoGradient?: number;
}

/** A body with its own properties, drawn over the layers in list order (later shapes on top). */
export type ShapeDescription =
  | ({ kind: "rectangle"; x0M: number; x1M: number; z0M: number; z1M: number } & CellProperties)
  | ({ kind: "ellipse"; centerXM: number; centerZM: number; radiusXM: number; radiusZM: number } & CellProperties)
  | ({ kind: "polygon"; points: Array<[number, number]> } & CellProperties);

/** Grid geometry: origin of cell (0, 0) and square spacing, m. */
export interface GridDescription {
  originX: number;
  originZ: number;
  spacingM: number;
  nx: number;
  nz: number;
}

/** True when the point (x, z) lies inside the shape (boundary included). */
export function shapeContains(s: ShapeDescription, x: number, z: number): boolean {
  switch (s.kind) {
    case "rectangle":
      return x >= Math.min(s.x0M, s.x1M) && x <= Math.max(s.x0M, s.x1M) && z >= Math.min(s.z0M, s.z1M) && z <= Math.max(s.z0M, s.z1M);
    case "ellipse": {
      const u = (x - s.centerXM) / s.radiusXM;
      const w = (z - s.centerZM) / s.radiusZM;
      return u * u + w * w <= 1;
    }
    case "polygon": {
      // Even-odd ray casting (common practice).
      const p = s.points;
      let inside = false;
      for (let a = 0, b = p.length - 1; a < p.length; b = a++) {
        const [xa, za] = p[a];
        const [xb, zb] = p[b];
        if (za > z !== zb > z && x < ((xb - xa) * (z - za)) / (zb - za) + xa) inside = !inside;
      }
      return inside;
    }
  }
}

/** Bounding box of a shape, m. */
export function shapeBounds(s: ShapeDescription): { xMin: number; xMax: number; zMin: number; zMax: number } {
  switch (s.kind) {
    case "rectangle":
      return { xMin: Math.min(s.x0M, s.x1M), xMax: Math.max(s.x0M, s.x1M), zMin: Math.min(s.z0M, s.z1M), zMax: Math.max(s.z0M, s.z1M) };
    case "ellipse":
      return { xMin: s.centerXM - s.radiusXM, xMax: s.centerXM + s.radiusXM, zMin: s.centerZM - s.radiusZM, zMax: s.centerZM + s.radiusZM };
    case "polygon": {
      const xs = s.points.map((p) => p[0]);
      const zs = s.points.map((p) => p[1]);
      return { xMin: Math.min(...xs), xMax: Math.max(...xs), zMin: Math.min(...zs), zMax: Math.max(...zs) };
    }
  }
}

/** Number of grid nodes inside a shape. */
export function countShapeCells(grid: GridDescription, s: ShapeDescription): number {
  let n = 0;
  const b = shapeBounds(s);
  const i0 = Math.max(0, Math.floor((b.xMin - grid.originX) / grid.spacingM));
  const i1 = Math.min(grid.nx - 1, Math.ceil((b.xMax - grid.originX) / grid.spacingM));
  const j0 = Math.max(0, Math.floor((b.zMin - grid.originZ) / grid.spacingM));
  const j1 = Math.min(grid.nz - 1, Math.ceil((b.zMax - grid.originZ) / grid.spacingM));
  for (let j = j0; j <= j1; j++) {
    for (let i = i0; i <= i1; i++) if (shapeContains(s, grid.originX + i * grid.spacingM, grid.originZ + j * grid.spacingM)) n++;
  }
  return n;
}

/**
 * Builds the model: each node (x = originX + i·h, z = originZ + j·h) takes the layer whose top is
 * the deepest at or above z (values at its top plus gradient × depth below the top), then the
 * last shape containing it. Layers must be sorted by `topM`, the first at or above the grid top.
 */
export function buildModel(grid: GridDescription, layers: LayerDescription[], shapes: ShapeDescription[] = []): ElasticModel {
  const { nx, nz, spacingM: h, originX, originZ } = grid;
  if (!Number.isInteger(nx) || nx < 4) throw new RangeError(`nx must be an integer ≥ 4, got ${nx}`);
  if (!Number.isInteger(nz) || nz < 4) throw new RangeError(`nz must be an integer ≥ 4, got ${nz}`);
  if (!(h > 0)) throw new RangeError(`spacingM must be > 0, got ${h}`);
  if (layers.length === 0) throw new RangeError("layers must hold at least one layer");
  if (layers[0].topM > originZ) throw new RangeError(`the first layer's top (${layers[0].topM} m) must be at or above the grid top (${originZ} m)`);
  const vp = new Float32Array(nx * nz);
  const vs = new Float32Array(nx * nz);
  const rho = new Float32Array(nx * nz);
  let li = 0;
  for (let j = 0; j < nz; j++) {
    const z = originZ + j * h;
    while (li + 1 < layers.length && layers[li + 1].topM <= z) li++;
    const L = layers[li];
    const dz = z - L.topM;
    const a = L.vp + (L.vpGradient ?? 0) * dz;
    const b = L.vs + (L.vsGradient ?? 0) * dz;
    const c = L.rho + (L.rhoGradient ?? 0) * dz;
    vp.fill(a, j * nx, (j + 1) * nx);
    vs.fill(b, j * nx, (j + 1) * nx);
    rho.fill(c, j * nx, (j + 1) * nx);
  }
  const model: ElasticModel = { kind: "model", nx, nz, spacingM: h, originX, originZ, vp, vs, rho };
  paintShapes(model, shapes);
  return model;
}

/** Draws shapes over `model` in place (later shapes on top); properties a shape leaves out stay. */
export function paintShapes(model: ElasticModel, shapes: ShapeDescription[]): ElasticModel {
  const { nx, nz, spacingM: h, originX, originZ, vp, vs, rho } = model;
  for (const s of shapes) {
    for (let j = 0; j < nz; j++) {
      for (let i = 0; i < nx; i++) {
        if (!shapeContains(s, originX + i * h, originZ + j * h)) continue;
        const k = j * nx + i;
        if (s.vp !== undefined) vp[k] = s.vp;
        if (s.vs !== undefined) vs[k] = s.vs;
        if (s.rho !== undefined) rho[k] = s.rho;
      }
    }
  }
  return model;
}

/** The model as CSV text: header `x,z,vp,vs,rho`, one row per node, rows by depth then x. */
export function modelToCsv(m: ElasticModel): string {
  const lines = ["x,z,vp,vs,rho"];
  for (let j = 0; j < m.nz; j++) {
    const z = m.originZ + j * m.spacingM;
    for (let i = 0; i < m.nx; i++) {
      const k = j * m.nx + i;
      lines.push(`${num(m.originX + i * m.spacingM)},${num(z)},${m.vp[k]},${m.vs[k]},${m.rho[k]}`);
    }
  }
  return lines.join("\n") + "\n";
}

function num(x: number): string {
  return String(Number(x.toPrecision(10)));
}

/**
 * Reads a CSV grid (header naming x, z, vp, vs, rho in any order, or x_m, z_m, vp_m_per_s,
 * vs_m_per_s, rho_kg_per_m3 as the artifact export writes them; `#` comment lines and blank
 * lines ignored) into a model. The nodes must form a complete regular grid with equal spacing in
 * x and z. Errors name `name` and the line.
 */
export function modelFromCsv(text: string, name = "model CSV"): ElasticModel {
  const bad = (line: number, msg: string, expected?: string) =>
    new AppError("bad-input", `${name}: line ${line}: ${msg}`, { file: name, line, expected });
  const rows = text.split(/\r?\n/);
  let header: string[] | undefined;
  let headerLine = 0;
  const data: Array<{ line: number; v: number[] }> = [];
  for (let n = 0; n < rows.length; n++) {
    const raw = rows[n].trim();
    if (raw === "" || raw.startsWith("#")) continue;
    const cells = raw.split(",").map((c) => c.trim());
    if (!header) {
      header = cells.map((c) => c.toLowerCase());
      headerLine = n + 1;
      continue;
    }
    const v = cells.map(Number);
    if (cells.length !== header.length) throw bad(n + 1, `${cells.length} columns, the header has ${header.length}`);
    const k = v.findIndex((x) => !Number.isFinite(x));
    if (k >= 0) throw bad(n + 1, `column "${header[k]}" is "${cells[k]}"`, "a number");
    data.push({ line: n + 1, v });
  }
  if (!header) throw bad(1, "no header row", "x,z,vp,vs,rho");
  const col: Record<string, number> = {};
  // Plain names, or the unit-suffixed names of the artifact export (x_m, vp_m_per_s, rho_kg_per_m3, ...).
  const aliases: Record<string, string[]> = {
    x: ["x", "x_m"],
    z: ["z", "z_m"],
    vp: ["vp", "vp_m_per_s"],
    vs: ["vs", "vs_m_per_s"],
    rho: ["rho", "rho_kg_per_m3"],
  };
  for (const [c, names] of Object.entries(aliases)) {
    col[c] = header.findIndex((h) => names.includes(h));
    if (col[c] < 0) throw bad(headerLine, `header lacks column "${c}"`, "x,z,vp,vs,rho");
  }
  if (data.length < 16) throw bad(headerLine, `only ${data.length} nodes`, "a grid of at least 4 × 4 nodes");
  const xs = uniqueSorted(data.map((d) => d.v[col.x]));
  const zs = uniqueSorted(data.map((d) => d.v[col.z]));
  const nx = xs.length;
  const nz = zs.length;
  const h = (xs[nx - 1] - xs[0]) / (nx - 1);
  const tol = 1e-6 * Math.max(1, Math.abs(h));
  const check = (vals: number[], axis: string) => {
    for (let i = 1; i < vals.length; i++) {
      if (Math.abs(vals[i] - vals[i - 1] - h) > 1e-4 * h) {
        const d = data.find((r) => r.v[col[axis]] === vals[i])!;
        throw bad(d.line, `${axis} = ${vals[i]} breaks the regular spacing ${h} m`, `${axis} values ${h} m apart`);
      }
    }
  };
  check(xs, "x");
  check(zs, "z");
  if (nx < 4 || nz < 4) throw bad(headerLine, `grid of ${nx} × ${nz} nodes`, "at least 4 × 4 nodes");
  if (data.length !== nx * nz) throw bad(headerLine, `${data.length} nodes for a ${nx} × ${nz} grid`, `${nx * nz} nodes, one per grid position`);
  const vp = new Float32Array(nx * nz);
  const vs = new Float32Array(nx * nz);
  const rho = new Float32Array(nx * nz);
  const seen = new Uint8Array(nx * nz);
  for (const d of data) {
    const i = Math.round((d.v[col.x] - xs[0]) / h);
    const j = Math.round((d.v[col.z] - zs[0]) / h);
    if (Math.abs(xs[0] + i * h - d.v[col.x]) > tol * 100 || Math.abs(zs[0] + j * h - d.v[col.z]) > tol * 100) {
      throw bad(d.line, `node (${d.v[col.x]}, ${d.v[col.z]}) is off the grid`, `positions ${h} m apart`);
    }
    const k = j * nx + i;
    if (seen[k]) throw bad(d.line, `node (${d.v[col.x]}, ${d.v[col.z]}) appears twice`);
    seen[k] = 1;
    vp[k] = d.v[col.vp];
    vs[k] = d.v[col.vs];
    rho[k] = d.v[col.rho];
  }
  return { kind: "model", nx, nz, spacingM: h, originX: xs[0], originZ: zs[0], vp, vs, rho };
}

function uniqueSorted(v: number[]): number[] {
  const s = [...new Set(v)].sort((a, b) => a - b);
  return s;
}
