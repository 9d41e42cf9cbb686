/**
 * Rays by steepest descent on a first-arrival travel-time field: from the receiver, step against
 * ∇T until the source is reached (the ray is orthogonal to the wavefronts, so it follows −∇T back
 * to the source: ∇T = s·t̂ with t̂ the ray direction, the eikonal's characteristics; common
 * practice in grid travel-time tomography).
 *
 * The sensitivity of a travel time to the node slownesses is the ray integral of the bilinear
 * shape functions: with s(x) = Σ_k s_k φ_k(x), t = ∫_ray s dl, so ∂t/∂s_k = ∫_ray φ_k dl (to first
 * order the ray does not move: Fermat's principle). Each step's length is shared among the four
 * nodes around its midpoint by the bilinear weights, so a ray's entries sum to its length: the
 * "ray length per cell" of the node-centred cells.
 *
 * Layout: times `[z][x]` on nodes, positions in metres from the grid origin, z positive down.
 */
import type { TravelTimeGrid } from "./eikonal";

/** A ray's sensitivity row: node indices (ascending) and ray length attributed to each, m. */
export interface RaySensitivity {
  nodes: Int32Array;
  lengthsM: Float64Array;
  /** Total ray length, m. */
  lengthM: number;
  /** Ray path from receiver to source, x then z per point, m from the grid origin. */
  path: Float64Array;
  /** False when the descent hit the step limit before reaching the source. */
  reached: boolean;
}

/** Reusable buffers for {@link traceRay}: one per grid. */
export interface RayWorkspace {
  gradX: Float64Array;
  gradZ: Float64Array;
  accumulator: Float64Array;
  touched: Int32Array;
}

/** Node gradients of the times by central differences (one-sided at the edges), into a workspace. */
export function prepareRayWorkspace(times: Float64Array, grid: TravelTimeGrid, workspace?: RayWorkspace): RayWorkspace {
  const { nx, nz, spacingM: h } = grid;
  const n = nx * nz;
  if (times.length !== n) throw new RangeError(`times must have nx·nz = ${n} values, got ${times.length}`);
  const ws = workspace ?? { gradX: new Float64Array(n), gradZ: new Float64Array(n), accumulator: new Float64Array(n), touched: new Int32Array(n) };
  for (let iz = 0; iz < nz; iz++) {
    for (let ix = 0; ix < nx; ix++) {
      const k = iz * nx + ix;
      const xl = ix > 0 ? k - 1 : k;
      const xr = ix < nx - 1 ? k + 1 : k;
      const zu = iz > 0 ? k - nx : k;
      const zd = iz < nz - 1 ? k + nx : k;
      ws.gradX[k] = (times[xr] - times[xl]) / (((xr - xl) as number) * h);
      ws.gradZ[k] = (times[zd] - times[zu]) / (((zd - zu) / nx) * h);
    }
  }
  return ws;
}

/**
 * Traces one ray from (receiverX, receiverZ) down the gradient of the times prepared in
 * `workspace` to (sourceX, sourceZ); all positions in metres from the grid origin.
 * `stepCells` is the step length in cells (default 0.25).
 */
export function traceRay(
  workspace: RayWorkspace,
  grid: TravelTimeGrid,
  sourceX: number,
  sourceZ: number,
  receiverX: number,
  receiverZ: number,
  stepCells = 0.25,
): RaySensitivity {
  const { nx, nz, spacingM: h } = grid;
  if (!(stepCells > 0 && stepCells <= 1)) throw new RangeError(`stepCells must be in (0, 1], got ${stepCells}`);
  const xMax = (nx - 1) * h;
  const zMax = (nz - 1) * h;
  for (const [name, v, hi] of [["sourceX", sourceX, xMax], ["sourceZ", sourceZ, zMax], ["receiverX", receiverX, xMax], ["receiverZ", receiverZ, zMax]] as const) {
    if (!(v >= -1e-9 * h && v <= hi + 1e-9 * h)) throw new RangeError(`${name} must lie on the grid (0 … ${hi} m), got ${v}`);
  }
  const ds = stepCells * h;
  const acc = workspace.accumulator;
  const touched = workspace.touched;
  let touchedCount = 0;
  const add = (k: number, w: number) => {
    if (w === 0) return;
    if (acc[k] === 0) touched[touchedCount++] = k;
    acc[k] += w;
  };
  // Shares the length `len` of a segment with midpoint (x, z) among the four nodes around it.
  const deposit = (x: number, z: number, len: number) => {
    const fx = Math.min(Math.max(x / h, 0), nx - 1);
    const fz = Math.min(Math.max(z / h, 0), nz - 1);
    const ix = Math.min(Math.floor(fx), nx - 2);
    const iz = Math.min(Math.floor(fz), nz - 2);
    const u = fx - ix;
    const w = fz - iz;
    const k = iz * nx + ix;
    add(k, (1 - u) * (1 - w) * len);
    add(k + 1, u * (1 - w) * len);
    add(k + nx, (1 - u) * w * len);
    add(k + nx + 1, u * w * len);
  };
  const path: number[] = [receiverX, receiverZ];
  let x = receiverX;
  let z = receiverZ;
  let total = 0;
  // A ray is never longer than a few times the grid's perimeter; the limit only stops a descent
  // that wanders (a flat or noisy time field).
  const maxSteps = Math.ceil((8 * (nx + nz)) / stepCells);
  let reached = false;
  const gx = workspace.gradX;
  const gz = workspace.gradZ;
  for (let step = 0; step < maxSteps; step++) {
    const toSource = Math.hypot(sourceX - x, sourceZ - z);
    if (toSource <= 1.5 * ds) {
      // Close enough: the last piece is straight.
      deposit((x + sourceX) / 2, (z + sourceZ) / 2, toSource);
      total += toSource;
      x = sourceX;
      z = sourceZ;
      path.push(x, z);
      reached = true;
      break;
    }
    // Bilinear interpolation of the node gradients.
    const fx = Math.min(Math.max(x / h, 0), nx - 1);
    const fz = Math.min(Math.max(z / h, 0), nz - 1);
    const ix = Math.min(Math.floor(fx), nx - 2);
    const iz = Math.min(Math.floor(fz), nz - 2);
    const u = fx - ix;
    const w = fz - iz;
    const k = iz * nx + ix;
    let dx = (1 - w) * ((1 - u) * gx[k] + u * gx[k + 1]) + w * ((1 - u) * gx[k + nx] + u * gx[k + nx + 1]);
    let dz = (1 - w) * ((1 - u) * gz[k] + u * gz[k + 1]) + w * ((1 - u) * gz[k + nx] + u * gz[k + nx + 1]);
    let g = Math.hypot(dx, dz);
    if (!(g > 0)) {
      // Flat spot (e.g. a node where differences cancel): head for the source.
      dx = x - sourceX;
      dz = z - sourceZ;
      g = Math.hypot(dx, dz);
    }
    let nxp = x - (ds * dx) / g;
    let nzp = z - (ds * dz) / g;
    // Keep the ray inside the grid (a ray grazing the surface or an edge slides along it).
    nxp = Math.min(Math.max(nxp, 0), xMax);
    nzp = Math.min(Math.max(nzp, 0), zMax);
    const len = Math.hypot(nxp - x, nzp - z);
    if (len < 1e-6 * ds) {
      // Pinned against an edge: step straight towards the source instead.
      const d = Math.hypot(sourceX - x, sourceZ - z);
      nxp = x + (ds * (sourceX - x)) / d;
      nzp = z + (ds * (sourceZ - z)) / d;
    }
    const seg = Math.hypot(nxp - x, nzp - z);
    deposit((x + nxp) / 2, (z + nzp) / 2, seg);
    total += seg;
    x = nxp;
    z = nzp;
    path.push(x, z);
  }
  // Collect and clear the accumulator.
  const order = touched.subarray(0, touchedCount).slice().sort();
  const nodes = new Int32Array(order);
  const lengthsM = new Float64Array(touchedCount);
  for (let i = 0; i < touchedCount; i++) {
    lengthsM[i] = acc[nodes[i]];
    acc[nodes[i]] = 0;
  }
  return { nodes, lengthsM, lengthM: total, path: Float64Array.from(path), reached };
}
