/**
 * Memory layout shared by the WebAssembly kernel (pipeline/kernels/assembly/elastic.ts) and the
 * TypeScript reference kernel: where each field, material and absorbing-boundary array lives in one
 * linear buffer, and the computational grid around the model (absorbing strips on the sides and
 * bottom, and on top when there is no free surface).
 */

/** Wave mode: P-SV (vx, vz, σxx, σzz, σxz) or SH (vy, σxy, σyz). */
export type WaveMode = "psv" | "sh";

/** Halo columns on each side (zero, never updated); four keeps rows 16-byte aligned. */
export const HALO_X = 4;
/** Halo rows above and below (zero, or the mirrored stresses above a free surface). */
export const HALO_Z = 2;

/** Names of the arrays of one simulation, in the order of the kernel's pointer table. */
export const ARRAY_NAMES = [
  "f0", "f1", "f2", "f3", "f4",
  "m0", "m1", "m2", "m3", "m4",
  "axI", "bxI", "axH", "bxH", "azI", "bzI", "azH", "bzH",
  "px0", "px1", "px2", "px3", "pz0", "pz1", "pz2", "pz3",
] as const;
export type ArrayName = (typeof ARRAY_NAMES)[number];

/** Layout of one simulation's buffer. Offsets are in float32 elements from the buffer start. */
export interface FdLayout {
  mode: WaveMode;
  /** Model grid size. */
  modelNx: number;
  modelNz: number;
  /** Absorbing thickness, cells. */
  pmlCells: number;
  freeSurface: boolean;
  /** Computational columns (model plus absorbing strips) and the SIMD-padded count. */
  nx: number;
  nxv: number;
  /** Computational rows. */
  nrows: number;
  /** Floats per row including halo. */
  rowFloats: number;
  /** Float offset of cell (row 0, column 0) inside each grid array. */
  org: number;
  /** Column of model column 0; row of model row 0. */
  colOffset: number;
  rowOffset: number;
  /** Absorbing strip widths handled by the PML terms. */
  wx: number;
  wzTop: number;
  wzBot: number;
  /** Float offset of the i32 configuration table. */
  table: number;
  /** Float offset of each array (0 for arrays the mode does not use). */
  offsets: Record<ArrayName, number>;
  /** Floats in one grid array. */
  gridFloats: number;
  /** Total bytes needed from the buffer start. */
  totalBytes: number;
}

const align4 = (n: number) => Math.ceil(n / 4) * 4;

/**
 * Plans the buffer for a model of `modelNx` × `modelNz` cells with `pmlCells` absorbing cells
 * outside it, starting at byte `baseByte` (16-byte aligned).
 */
export function planLayout(opts: {
  mode: WaveMode;
  modelNx: number;
  modelNz: number;
  pmlCells: number;
  freeSurface: boolean;
  baseByte?: number;
}): FdLayout {
  const { mode, modelNx, modelNz, pmlCells, freeSurface } = opts;
  for (const [k, v] of Object.entries({ modelNx, modelNz })) {
    if (!Number.isInteger(v) || v < 8) throw new RangeError(`${k} must be an integer ≥ 8, got ${v}`);
  }
  if (!Number.isInteger(pmlCells) || pmlCells < 0) throw new RangeError(`pmlCells must be an integer ≥ 0, got ${pmlCells}`);
  const top = freeSurface ? 0 : pmlCells;
  const nx = modelNx + 2 * pmlCells;
  const nrows = modelNz + top + pmlCells;
  const nxv = align4(nx);
  const rowFloats = nxv + 2 * HALO_X;
  const gridFloats = rowFloats * (nrows + 2 * HALO_Z);
  const org = HALO_Z * rowFloats + HALO_X;
  // Strips cover the absorbing cells plus the first model cell (whose half position lies inside),
  // rounded up to whole groups of four columns for the SIMD kernel; the extra cells have a = 0.
  const w = pmlCells > 0 ? align4(pmlCells + 1) : 0;
  const wx = w;
  const wzTop = freeSurface ? 0 : w;
  const wzBot = w;

  let cursor = align4(Math.ceil((opts.baseByte ?? 0) / 4));
  const table = cursor;
  cursor += 64; // 36 i32 entries, rounded up
  const offsets = {} as Record<ArrayName, number>;
  const fieldCount = mode === "psv" ? 5 : 3;
  const xStrip = align4(nrows * 2 * wx);
  const zStrip = align4((wzTop + wzBot) * nxv);
  const psiCount = mode === "psv" ? 4 : 2;
  for (const name of ARRAY_NAMES) {
    let size = 0;
    const idx = Number(name.slice(-1));
    if (name[0] === "f") size = idx < fieldCount ? gridFloats : 0;
    else if (name[0] === "m") size = idx < fieldCount ? gridFloats : 0;
    else if (name.startsWith("ax") || name.startsWith("bx")) size = align4(nxv);
    else if (name.startsWith("az") || name.startsWith("bz")) size = align4(nrows);
    else if (name.startsWith("px")) size = idx < psiCount ? xStrip : 0;
    else if (name.startsWith("pz")) size = idx < psiCount ? zStrip : 0;
    offsets[name] = size > 0 ? cursor : 0;
    cursor += align4(size);
  }
  return {
    mode, modelNx, modelNz, pmlCells, freeSurface, nx, nxv, nrows, rowFloats, org,
    colOffset: pmlCells, rowOffset: top, wx, wzTop, wzBot, table, offsets, gridFloats,
    totalBytes: cursor * 4,
  };
}

/** Writes the configuration table the WebAssembly kernel's `configure` reads. */
export function writeConfigTable(layout: FdLayout, mem: Int32Array): void {
  const t = layout.table;
  const vals = [
    layout.nx, layout.nxv, layout.nrows, layout.rowFloats * 4, layout.org * 4,
    layout.wx, layout.wzTop, layout.wzBot, layout.freeSurface ? 1 : 0,
    ...ARRAY_NAMES.map((n) => layout.offsets[n] * 4),
  ];
  for (let k = 0; k < vals.length; k++) mem[t + k] = vals[k];
}
