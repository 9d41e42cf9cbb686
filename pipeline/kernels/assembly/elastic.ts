// 2D elastic velocity-stress finite differences on a staggered grid (Virieux 1986),
// fourth order in space with coefficients 9/8 and -1/24, second order in time (Levander 1988).
// Hot loops in 128-bit SIMD (f32x4). The TypeScript reference kernel in
// pipeline/kernels/fd/reference-kernel.ts is the readable specification of the same scheme and
// performs the same float32 operations in the same order.
//
// Memory layout (set by the TypeScript driver, see pipeline/kernels/fd/layout.ts): every field and
// material array has `rowBytes` bytes per row and holds the computational cell (row j, column i)
// at byte `org + j*rowBytes + 4*i`; two halo rows above and below and four halo columns on each side
// stay zero. Columns are processed in groups of four up to `nxv` (a multiple of 4); material
// coefficients are zero in the padding columns so those cells stay zero.
//
// Material coefficients are pre-scaled by dt/h: buoyancy dt/(rho h), moduli dt*M/h.
// Staggered positions (array element (j, i)):
//   P-SV: sxx, szz at (i, j); vx at (i+1/2, j); vz at (i, j+1/2); sxz at (i+1/2, j+1/2)
//   SH:   vy at (i, j); sxy at (i+1/2, j); syz at (i, j+1/2)
// Free surface (row 0 = z 0) by stress imaging (Levander 1988): szz = 0 on row 0, where the lambda
// array holds the surface modulus M - lambda^2/M for sxx instead; szz and sxz
// (P-SV) or syz (SH) mirrored with opposite sign above it; velocities above stay zero.
// Convolutional PML (Komatitsch & Martin 2007, kappa = 1): for each spatial derivative d in the
// absorbing strips, psi <- b psi + a d and the field gets coef * psi in addition to coef * d.

const C1: f32 = 9.0 / 8.0;
const C2: f32 = -1.0 / 24.0;
/** 2^-100: stored magnitudes below it become zero. */
const FLUSH_BELOW: f32 = 7.888609052210118e-31;

// Flush to zero. Ahead of a wave front the stencils leave values that decay through the subnormal
// range (below 2^-126), and arithmetic on subnormals is many times slower on common processors
// (WebAssembly cannot switch on the processor's flush-to-zero); measured here: 104 against 318
// million P-SV cell updates per second. Flushing stored values below 2^-100 keeps every product
// with the pre-scaled coefficients (at least about 1e-7) and every stencil difference normal.
// NaN and infinity pass unchanged.
@inline
function ftz(v: v128): v128 {
  return v128.andnot(v, f32x4.lt(f32x4.abs(v), f32x4.splat(FLUSH_BELOW)));
}

// Constants held in memory: a v128 constant in the code is rebuilt by the engine at every use
// inside a loop (three instructions each); a value loaded once before the loop is not.
const K_C1 = memory.data<f32>([C1, C1, C1, C1], 16);
const K_C2 = memory.data<f32>([C2, C2, C2, C2], 16);
const K_FLUSH = memory.data<f32>([FLUSH_BELOW, FLUSH_BELOW, FLUSH_BELOW, FLUSH_BELOW], 16);
const K_ABS = memory.data<i32>([0x7fffffff, 0x7fffffff, 0x7fffffff, 0x7fffffff], 16);

/** {@link ftz} with its constants passed in: |v| (sign bit cleared) below `flush` becomes +0. */
@inline
function ftzk(v: v128, absMask: v128, flush: v128): v128 {
  return v128.andnot(v, f32x4.lt(v128.and(v, absMask), flush));
}

// Layout.
let nx: i32 = 0; // computational columns
let nxv: i32 = 0; // columns processed per row, multiple of 4
let nrows: i32 = 0; // computational rows
let rb: usize = 0; // bytes per row
let org: usize = 0; // byte offset of cell (0, 0) inside each array
let wx: i32 = 0; // x absorbing strip width (columns on each side)
let wzTop: i32 = 0; // top absorbing strip rows (0 with a free surface)
let wzBot: i32 = 0; // bottom absorbing strip rows
let freeSurface: bool = false;

// Pointers (byte addresses of array bases).
let pF0: usize = 0; // P-SV: vx; SH: vy
let pF1: usize = 0; // P-SV: vz; SH: sxy
let pF2: usize = 0; // P-SV: sxx; SH: syz
let pF3: usize = 0; // P-SV: szz
let pF4: usize = 0; // P-SV: sxz
let pM0: usize = 0; // P-SV: bx; SH: b
let pM1: usize = 0; // P-SV: bz; SH: mux
let pM2: usize = 0; // P-SV: M = lambda+2mu; SH: muz
let pM3: usize = 0; // P-SV: lambda
let pM4: usize = 0; // P-SV: mu at sxz
// PML coefficient arrays: x per column (length nxv), z per row (length nrows); I integer, H half.
let pAxI: usize = 0;
let pBxI: usize = 0;
let pAxH: usize = 0;
let pBxH: usize = 0;
let pAzI: usize = 0;
let pBzI: usize = 0;
let pAzH: usize = 0;
let pBzH: usize = 0;
// Memory variables: x strips [row][2*wx], z strips [wzTop+wzBot][nxv].
let pPx0: usize = 0;
let pPx1: usize = 0;
let pPx2: usize = 0;
let pPx3: usize = 0;
let pPz0: usize = 0;
let pPz1: usize = 0;
let pPz2: usize = 0;
let pPz3: usize = 0;

/** First free byte after static data; the driver places its arrays from here. */
export function heapBase(): usize {
  return __heap_base;
}

/** Reads the layout and pointer table written by the driver at `table` (i32 entries). */
export function configure(table: usize): void {
  nx = load<i32>(table, 0);
  nxv = load<i32>(table, 4);
  nrows = load<i32>(table, 8);
  rb = <usize>load<i32>(table, 12);
  org = <usize>load<i32>(table, 16);
  wx = load<i32>(table, 20);
  wzTop = load<i32>(table, 24);
  wzBot = load<i32>(table, 28);
  freeSurface = load<i32>(table, 32) != 0;
  pF0 = <usize>load<i32>(table, 36);
  pF1 = <usize>load<i32>(table, 40);
  pF2 = <usize>load<i32>(table, 44);
  pF3 = <usize>load<i32>(table, 48);
  pF4 = <usize>load<i32>(table, 52);
  pM0 = <usize>load<i32>(table, 56);
  pM1 = <usize>load<i32>(table, 60);
  pM2 = <usize>load<i32>(table, 64);
  pM3 = <usize>load<i32>(table, 68);
  pM4 = <usize>load<i32>(table, 72);
  pAxI = <usize>load<i32>(table, 76);
  pBxI = <usize>load<i32>(table, 80);
  pAxH = <usize>load<i32>(table, 84);
  pBxH = <usize>load<i32>(table, 88);
  pAzI = <usize>load<i32>(table, 92);
  pBzI = <usize>load<i32>(table, 96);
  pAzH = <usize>load<i32>(table, 100);
  pBzH = <usize>load<i32>(table, 104);
  pPx0 = <usize>load<i32>(table, 108);
  pPx1 = <usize>load<i32>(table, 112);
  pPx2 = <usize>load<i32>(table, 116);
  pPx3 = <usize>load<i32>(table, 120);
  pPz0 = <usize>load<i32>(table, 124);
  pPz1 = <usize>load<i32>(table, 128);
  pPz2 = <usize>load<i32>(table, 132);
  pPz3 = <usize>load<i32>(table, 136);
}

// Each time step runs as one pass over the rows: the velocity update of row j, then the stress
// update of row j - LAG, whose velocity neighbours (rows j-LAG-2 .. j-LAG+2) are new by then while
// the stresses that row j reads (rows j-2 .. j+2) are still old. The rows in flight stay in cache,
// so each array streams from memory once per step instead of twice. Per cell the operations and
// their order are those of a velocity pass over the whole grid followed by a stress pass. Two is
// the least lag that keeps both conditions; the fewer rows in flight, the more of them stay in the
// processor's second-level cache (measured: about 4 % faster than 3 on a 1040-column grid).
const LAG = 2;

// ---------------------------------------------------------------------------------------------
// P-SV

// Each row runs in segments: the left absorbing strip (columns 0 .. wx-1), the interior, and the
// right absorbing strip (columns nx-wx .. nx-1). The absorbing terms of a field are added in the
// same loop as its interior update, from the derivatives just computed, instead of in later passes
// that compute them again (pmlXRow, pmlZRow): x terms in the strips, z terms on the rows of the z
// strips. Per cell the operations and their order are those of the separate passes (interior, x, z;
// for sxz interior, z, x, as psvStressPml has them), so the wavefields are the same bit for bit.
// The free-surface row keeps the separate passes. The padding columns nx .. nxv-1 are never
// updated: their material coefficients are zero, so they stay zero either way. vx, vz, the normal
// stresses and sxz run in separate loops, each with few row pointers, which the engine then keeps
// in registers instead of reloading them from the stack in every turn (measured: about 5 % faster).

// Lanes kept by a partial group of four at the end of the interior: the first 1, 2 or 3.
const K_KEEP = memory.data<i32>([-1, 0, 0, 0, -1, -1, 0, 0, -1, -1, -1, 0], 16);

/**
 * vx at (i+1/2, j) for the four cells at byte offset `o` of row pointers (see psvVxRun): d sxx/dx +
 * d sxz/dz. X: also the x absorbing term (psi at px + o, profile a/b at pa/pb + o). P: store only
 * the lanes set in `keep`.
 */
@inline
function psvVxQuad(c1: v128, c2: v128, absMask: v128, flush: v128, sxx: usize, sxzM1: usize, sxzM2: usize, sxzP1: usize, sxz0: usize, vx: usize, bx: usize, o: usize,
  X: bool, px: usize, pa: usize, pb: usize, Z: bool, pz: usize, az: v128, bz2: v128, P: bool, keep: v128): void {
  const xm1 = v128.load(sxx + o);
  const x0 = v128.load(sxx + o, 4);
  const x1 = v128.load(sxx + o, 8);
  const x2 = v128.load(sxx + o, 12);
  const dxx = f32x4.add(f32x4.mul(c1, f32x4.sub(x1, x0)), f32x4.mul(c2, f32x4.sub(x2, xm1)));
  const dzq = f32x4.add(
    f32x4.mul(c1, f32x4.sub(v128.load(sxz0 + o), v128.load(sxzM1 + o))),
    f32x4.mul(c2, f32x4.sub(v128.load(sxzP1 + o), v128.load(sxzM2 + o))),
  );
  const b = v128.load(bx + o);
  let v = ftzk(f32x4.add(v128.load(vx + o), f32x4.mul(b, f32x4.add(dxx, dzq))), absMask, flush);
  if (X) {
    const p = ftzk(f32x4.add(f32x4.mul(v128.load(pb + o), v128.load(px + o)), f32x4.mul(v128.load(pa + o), dxx)), absMask, flush);
    v128.store(px + o, p);
    v = ftzk(f32x4.add(v, f32x4.mul(b, p)), absMask, flush);
  }
  if (Z) {
    let p = ftzk(f32x4.add(f32x4.mul(bz2, v128.load(pz + o)), f32x4.mul(az, dzq)), absMask, flush);
    if (P) p = v128.bitselect(p, v128.load(pz + o), keep);
    v128.store(pz + o, p);
    v = ftzk(f32x4.add(v, f32x4.mul(b, p)), absMask, flush);
  }
  if (P) v = v128.bitselect(v, v128.load(vx + o), keep);
  v128.store(vx + o, v);
}

/** vz at (i, j+1/2): d sxz/dx + d szz/dz (flags as psvVxQuad). */
@inline
function psvVzQuad(c1: v128, c2: v128, absMask: v128, flush: v128, sxz: usize, szz: usize, szzM1: usize, szzP1: usize, szzP2: usize, vz: usize, bz: usize, o: usize,
  X: bool, px: usize, pa: usize, pb: usize, Z: bool, pz: usize, az: v128, bz2: v128, P: bool, keep: v128): void {
  const dxq = f32x4.add(
    f32x4.mul(c1, f32x4.sub(v128.load(sxz + o, 8), v128.load(sxz + o, 4))),
    f32x4.mul(c2, f32x4.sub(v128.load(sxz + o, 12), v128.load(sxz + o))),
  );
  const dzz = f32x4.add(
    f32x4.mul(c1, f32x4.sub(v128.load(szzP1 + o), v128.load(szz + o))),
    f32x4.mul(c2, f32x4.sub(v128.load(szzP2 + o), v128.load(szzM1 + o))),
  );
  const b = v128.load(bz + o);
  let v = ftzk(f32x4.add(v128.load(vz + o), f32x4.mul(b, f32x4.add(dxq, dzz))), absMask, flush);
  if (X) {
    const p = ftzk(f32x4.add(f32x4.mul(v128.load(pb + o), v128.load(px + o)), f32x4.mul(v128.load(pa + o), dxq)), absMask, flush);
    v128.store(px + o, p);
    v = ftzk(f32x4.add(v, f32x4.mul(b, p)), absMask, flush);
  }
  if (Z) {
    let p = ftzk(f32x4.add(f32x4.mul(bz2, v128.load(pz + o)), f32x4.mul(az, dzz)), absMask, flush);
    if (P) p = v128.bitselect(p, v128.load(pz + o), keep);
    v128.store(pz + o, p);
    v = ftzk(f32x4.add(v, f32x4.mul(b, p)), absMask, flush);
  }
  if (P) v = v128.bitselect(v, v128.load(vz + o), keep);
  v128.store(vz + o, v);
}

/** sxx and szz at (i, j): d vx/dx, d vz/dz (flags as psvVxQuad). */
@inline
function psvNormalQuad(c1: v128, c2: v128, absMask: v128, flush: v128, vx: usize, vz0: usize, vzM1: usize, vzM2: usize, vzP1: usize, sxx: usize, szz: usize, mm: usize, ll: usize, o: usize,
  X: bool, px: usize, pa: usize, pb: usize, Z: bool, pz: usize, az: v128, bz2: v128, P: bool, keep: v128): void {
  // d vx/dx at i: vx(i)-vx(i-1), vx(i+1)-vx(i-2)
  const dxvx = f32x4.add(
    f32x4.mul(c1, f32x4.sub(v128.load(vx + o, 8), v128.load(vx + o, 4))),
    f32x4.mul(c2, f32x4.sub(v128.load(vx + o, 12), v128.load(vx + o))),
  );
  // d vz/dz at j: vz(j)-vz(j-1), vz(j+1)-vz(j-2)
  const dzvz = f32x4.add(
    f32x4.mul(c1, f32x4.sub(v128.load(vz0 + o), v128.load(vzM1 + o))),
    f32x4.mul(c2, f32x4.sub(v128.load(vzP1 + o), v128.load(vzM2 + o))),
  );
  const m = v128.load(mm + o);
  const l = v128.load(ll + o);
  let a = ftzk(f32x4.add(v128.load(sxx + o), f32x4.add(f32x4.mul(m, dxvx), f32x4.mul(l, dzvz))), absMask, flush);
  let c = ftzk(f32x4.add(v128.load(szz + o), f32x4.add(f32x4.mul(l, dxvx), f32x4.mul(m, dzvz))), absMask, flush);
  if (X) {
    const p = ftzk(f32x4.add(f32x4.mul(v128.load(pb + o), v128.load(px + o)), f32x4.mul(v128.load(pa + o), dxvx)), absMask, flush);
    v128.store(px + o, p);
    a = ftzk(f32x4.add(a, f32x4.mul(m, p)), absMask, flush);
    c = ftzk(f32x4.add(c, f32x4.mul(l, p)), absMask, flush);
  }
  if (Z) {
    let p = ftzk(f32x4.add(f32x4.mul(bz2, v128.load(pz + o)), f32x4.mul(az, dzvz)), absMask, flush);
    if (P) p = v128.bitselect(p, v128.load(pz + o), keep);
    v128.store(pz + o, p);
    a = ftzk(f32x4.add(a, f32x4.mul(l, p)), absMask, flush);
    c = ftzk(f32x4.add(c, f32x4.mul(m, p)), absMask, flush);
  }
  if (P) {
    a = v128.bitselect(a, v128.load(sxx + o), keep);
    c = v128.bitselect(c, v128.load(szz + o), keep);
  }
  v128.store(sxx + o, a);
  v128.store(szz + o, c);
}

/** sxz at (i+1/2, j+1/2): d vx/dz + d vz/dx (flags as psvVxQuad). */
@inline
function psvShearQuad(c1: v128, c2: v128, absMask: v128, flush: v128, vx0: usize, vxM1: usize, vxP1: usize, vxP2: usize, vz: usize, sxz: usize, mu: usize, o: usize,
  X: bool, px: usize, pa: usize, pb: usize, Z: bool, pz: usize, az: v128, bz2: v128, P: bool, keep: v128): void {
  // d vx/dz = vx(j+1)-vx(j), vx(j+2)-vx(j-1); d vz/dx = vz(i+1)-vz(i), vz(i+2)-vz(i-1)
  const dzvx = f32x4.add(
    f32x4.mul(c1, f32x4.sub(v128.load(vxP1 + o), v128.load(vx0 + o))),
    f32x4.mul(c2, f32x4.sub(v128.load(vxP2 + o), v128.load(vxM1 + o))),
  );
  const dxvz = f32x4.add(
    f32x4.mul(c1, f32x4.sub(v128.load(vz + o, 8), v128.load(vz + o, 4))),
    f32x4.mul(c2, f32x4.sub(v128.load(vz + o, 12), v128.load(vz + o))),
  );
  const g = v128.load(mu + o);
  let v = ftzk(f32x4.add(v128.load(sxz + o), f32x4.mul(g, f32x4.add(dzvx, dxvz))), absMask, flush);
  // The z term before the x term here, as in the separate passes (psvStressPml).
  if (Z) {
    let p = ftzk(f32x4.add(f32x4.mul(bz2, v128.load(pz + o)), f32x4.mul(az, dzvx)), absMask, flush);
    if (P) p = v128.bitselect(p, v128.load(pz + o), keep);
    v128.store(pz + o, p);
    v = ftzk(f32x4.add(v, f32x4.mul(g, p)), absMask, flush);
  }
  if (X) {
    const p = ftzk(f32x4.add(f32x4.mul(v128.load(pb + o), v128.load(px + o)), f32x4.mul(v128.load(pa + o), dxvz)), absMask, flush);
    v128.store(px + o, p);
    v = ftzk(f32x4.add(v, f32x4.mul(g, p)), absMask, flush);
  }
  if (P) v = v128.bitselect(v, v128.load(sxz + o), keep);
  v128.store(sxz + o, v);
}

// Runs of one field group over the byte offsets from .. to-1 of row j (multiples of 16 apart). X:
// with the x absorbing term, psi of byte offset o at px + o; Z: with the z absorbing term (row j
// lies in a z strip). P: the one partial group of four at `from`, lanes kept by `keep`. Four groups
// per loop turn where there is no x term.

/** Psi row of row j in a z absorbing strip (arrays [wzTop + wzBot][nxv]). */
@inline
function zSlot(j: i32): i32 {
  return j < wzTop ? j : j - (nrows - wzBot) + wzTop;
}

@inline
function psvVxRun(j: i32, from: usize, to: usize, X: bool, px: usize, Z: bool, P: bool, keep: v128): void {
  const c1 = v128.load(K_C1);
  const c2 = v128.load(K_C2);
  const absMask = v128.load(K_ABS);
  const flush = v128.load(K_FLUSH);
  const r = rb;
  const base = org + <usize>j * r;
  const sxx = pF2 + base - 4; // columns i-1 .. i+2 at byte offsets 0 .. 12
  const sxz0 = pF4 + base;
  const sxzM1 = sxz0 - r;
  const sxzM2 = sxz0 - 2 * r;
  const sxzP1 = sxz0 + r;
  const vx = pF0 + base;
  const bx = pM0 + base;
  const pa = pAxH;
  const pb = pBxH;
  const pz: usize = Z ? pPz0 + ((<usize>(zSlot(j) * nxv)) << 2) : 0;
  const az = Z ? v128.load32_splat(pAzI + (<usize>j << 2)) : v128.splat<i32>(0);
  const bz2 = Z ? v128.load32_splat(pBzI + (<usize>j << 2)) : v128.splat<i32>(0);
  if (P) {
    psvVxQuad(c1, c2, absMask, flush, sxx, sxzM1, sxzM2, sxzP1, sxz0, vx, bx, from, false, 0, 0, 0, Z, pz, az, bz2, true, keep);
    return;
  }
  let o = from;
  if (!X) {
    for (; o + 48 < to; o += 64) {
      psvVxQuad(c1, c2, absMask, flush, sxx, sxzM1, sxzM2, sxzP1, sxz0, vx, bx, o, false, 0, 0, 0, Z, pz, az, bz2, false, keep);
      psvVxQuad(c1, c2, absMask, flush, sxx, sxzM1, sxzM2, sxzP1, sxz0, vx, bx, o + 16, false, 0, 0, 0, Z, pz, az, bz2, false, keep);
      psvVxQuad(c1, c2, absMask, flush, sxx, sxzM1, sxzM2, sxzP1, sxz0, vx, bx, o + 32, false, 0, 0, 0, Z, pz, az, bz2, false, keep);
      psvVxQuad(c1, c2, absMask, flush, sxx, sxzM1, sxzM2, sxzP1, sxz0, vx, bx, o + 48, false, 0, 0, 0, Z, pz, az, bz2, false, keep);
    }
  }
  for (; o < to; o += 16) psvVxQuad(c1, c2, absMask, flush, sxx, sxzM1, sxzM2, sxzP1, sxz0, vx, bx, o, X, px, pa, pb, Z, pz, az, bz2, false, keep);
}

@inline
function psvVzRun(j: i32, from: usize, to: usize, X: bool, px: usize, Z: bool, P: bool, keep: v128): void {
  const c1 = v128.load(K_C1);
  const c2 = v128.load(K_C2);
  const absMask = v128.load(K_ABS);
  const flush = v128.load(K_FLUSH);
  const r = rb;
  const base = org + <usize>j * r;
  const sxz = pF4 + base - 8; // columns i-2 .. i+1 at byte offsets 0 .. 12
  const szz = pF3 + base;
  const szzM1 = szz - r;
  const szzP1 = szz + r;
  const szzP2 = szz + 2 * r;
  const vz = pF1 + base;
  const bz = pM1 + base;
  const pa = pAxI;
  const pb = pBxI;
  const pz: usize = Z ? pPz1 + ((<usize>(zSlot(j) * nxv)) << 2) : 0;
  const az = Z ? v128.load32_splat(pAzH + (<usize>j << 2)) : v128.splat<i32>(0);
  const bz2 = Z ? v128.load32_splat(pBzH + (<usize>j << 2)) : v128.splat<i32>(0);
  if (P) {
    psvVzQuad(c1, c2, absMask, flush, sxz, szz, szzM1, szzP1, szzP2, vz, bz, from, false, 0, 0, 0, Z, pz, az, bz2, true, keep);
    return;
  }
  let o = from;
  if (!X) {
    for (; o + 48 < to; o += 64) {
      psvVzQuad(c1, c2, absMask, flush, sxz, szz, szzM1, szzP1, szzP2, vz, bz, o, false, 0, 0, 0, Z, pz, az, bz2, false, keep);
      psvVzQuad(c1, c2, absMask, flush, sxz, szz, szzM1, szzP1, szzP2, vz, bz, o + 16, false, 0, 0, 0, Z, pz, az, bz2, false, keep);
      psvVzQuad(c1, c2, absMask, flush, sxz, szz, szzM1, szzP1, szzP2, vz, bz, o + 32, false, 0, 0, 0, Z, pz, az, bz2, false, keep);
      psvVzQuad(c1, c2, absMask, flush, sxz, szz, szzM1, szzP1, szzP2, vz, bz, o + 48, false, 0, 0, 0, Z, pz, az, bz2, false, keep);
    }
  }
  for (; o < to; o += 16) psvVzQuad(c1, c2, absMask, flush, sxz, szz, szzM1, szzP1, szzP2, vz, bz, o, X, px, pa, pb, Z, pz, az, bz2, false, keep);
}

@inline
function psvNormalRun(j: i32, from: usize, to: usize, X: bool, px: usize, Z: bool, P: bool, keep: v128): void {
  const c1 = v128.load(K_C1);
  const c2 = v128.load(K_C2);
  const absMask = v128.load(K_ABS);
  const flush = v128.load(K_FLUSH);
  const r = rb;
  const base = org + <usize>j * r;
  const vx = pF0 + base - 8; // columns i-2 .. i+1 at byte offsets 0 .. 12
  const vz0 = pF1 + base;
  const vzM1 = vz0 - r;
  const vzM2 = vz0 - 2 * r;
  const vzP1 = vz0 + r;
  const sxx = pF2 + base;
  const szz = pF3 + base;
  const mm = pM2 + base;
  const ll = pM3 + base;
  const pa = pAxI;
  const pb = pBxI;
  const pz: usize = Z ? pPz2 + ((<usize>(zSlot(j) * nxv)) << 2) : 0;
  const az = Z ? v128.load32_splat(pAzI + (<usize>j << 2)) : v128.splat<i32>(0);
  const bz2 = Z ? v128.load32_splat(pBzI + (<usize>j << 2)) : v128.splat<i32>(0);
  if (P) {
    psvNormalQuad(c1, c2, absMask, flush, vx, vz0, vzM1, vzM2, vzP1, sxx, szz, mm, ll, from, false, 0, 0, 0, Z, pz, az, bz2, true, keep);
    return;
  }
  let o = from;
  if (!X) {
    for (; o + 48 < to; o += 64) {
      psvNormalQuad(c1, c2, absMask, flush, vx, vz0, vzM1, vzM2, vzP1, sxx, szz, mm, ll, o, false, 0, 0, 0, Z, pz, az, bz2, false, keep);
      psvNormalQuad(c1, c2, absMask, flush, vx, vz0, vzM1, vzM2, vzP1, sxx, szz, mm, ll, o + 16, false, 0, 0, 0, Z, pz, az, bz2, false, keep);
      psvNormalQuad(c1, c2, absMask, flush, vx, vz0, vzM1, vzM2, vzP1, sxx, szz, mm, ll, o + 32, false, 0, 0, 0, Z, pz, az, bz2, false, keep);
      psvNormalQuad(c1, c2, absMask, flush, vx, vz0, vzM1, vzM2, vzP1, sxx, szz, mm, ll, o + 48, false, 0, 0, 0, Z, pz, az, bz2, false, keep);
    }
  }
  for (; o < to; o += 16) psvNormalQuad(c1, c2, absMask, flush, vx, vz0, vzM1, vzM2, vzP1, sxx, szz, mm, ll, o, X, px, pa, pb, Z, pz, az, bz2, false, keep);
}

@inline
function psvShearRun(j: i32, from: usize, to: usize, X: bool, px: usize, Z: bool, P: bool, keep: v128): void {
  const c1 = v128.load(K_C1);
  const c2 = v128.load(K_C2);
  const absMask = v128.load(K_ABS);
  const flush = v128.load(K_FLUSH);
  const r = rb;
  const base = org + <usize>j * r;
  const vx0 = pF0 + base;
  const vxM1 = vx0 - r;
  const vxP1 = vx0 + r;
  const vxP2 = vx0 + 2 * r;
  const vz = pF1 + base - 4; // columns i-1 .. i+2 at byte offsets 0 .. 12
  const sxz = pF4 + base;
  const mu = pM4 + base;
  const pa = pAxH;
  const pb = pBxH;
  const pz: usize = Z ? pPz3 + ((<usize>(zSlot(j) * nxv)) << 2) : 0;
  const az = Z ? v128.load32_splat(pAzH + (<usize>j << 2)) : v128.splat<i32>(0);
  const bz2 = Z ? v128.load32_splat(pBzH + (<usize>j << 2)) : v128.splat<i32>(0);
  if (P) {
    psvShearQuad(c1, c2, absMask, flush, vx0, vxM1, vxP1, vxP2, vz, sxz, mu, from, false, 0, 0, 0, Z, pz, az, bz2, true, keep);
    return;
  }
  let o = from;
  if (!X) {
    for (; o + 48 < to; o += 64) {
      psvShearQuad(c1, c2, absMask, flush, vx0, vxM1, vxP1, vxP2, vz, sxz, mu, o, false, 0, 0, 0, Z, pz, az, bz2, false, keep);
      psvShearQuad(c1, c2, absMask, flush, vx0, vxM1, vxP1, vxP2, vz, sxz, mu, o + 16, false, 0, 0, 0, Z, pz, az, bz2, false, keep);
      psvShearQuad(c1, c2, absMask, flush, vx0, vxM1, vxP1, vxP2, vz, sxz, mu, o + 32, false, 0, 0, 0, Z, pz, az, bz2, false, keep);
      psvShearQuad(c1, c2, absMask, flush, vx0, vxM1, vxP1, vxP2, vz, sxz, mu, o + 48, false, 0, 0, 0, Z, pz, az, bz2, false, keep);
    }
  }
  for (; o < to; o += 16) psvShearQuad(c1, c2, absMask, flush, vx0, vxM1, vxP1, vxP2, vz, sxz, mu, o, X, px, pa, pb, Z, pz, az, bz2, false, keep);
}

/** True when row j lies in a z absorbing strip. */
@inline
function inZStrip(j: i32): bool {
  return j < wzTop || j >= nrows - wzBot;
}

/** Segments of row j: the left strip, the whole groups of the interior, the partial one, the right strip. */
@inline
function psvVelocitySegments(j: i32, Z: bool): void {
  const none = v128.splat<i32>(0);
  const L = (<usize>wx) << 2;
  const R = (<usize>(nx - wx)) << 2;
  const E = (<usize>nx) << 2;
  const whole = L + ((R - L) & ~(<usize>15));
  const psiRow = (<usize>(j * 2 * wx)) << 2;
  const rightShift = L - R; // the right strip's first column has psi slot wx
  psvVxRun(j, 0, L, true, pPx0 + psiRow, Z, false, none);
  psvVxRun(j, L, whole, false, 0, Z, false, none);
  psvVxRun(j, R, E, true, pPx0 + psiRow + rightShift, Z, false, none);
  psvVzRun(j, 0, L, true, pPx1 + psiRow, Z, false, none);
  psvVzRun(j, L, whole, false, 0, Z, false, none);
  psvVzRun(j, R, E, true, pPx1 + psiRow + rightShift, Z, false, none);
  if (whole < R) {
    const keep = v128.load(K_KEEP + (((R - whole) - 4) << 2));
    psvVxRun(j, whole, whole + 16, false, 0, Z, true, keep);
    psvVzRun(j, whole, whole + 16, false, 0, Z, true, keep);
  }
}

@inline
function psvStressSegments(k: i32, Z: bool): void {
  const none = v128.splat<i32>(0);
  const L = (<usize>wx) << 2;
  const R = (<usize>(nx - wx)) << 2;
  const E = (<usize>nx) << 2;
  const whole = L + ((R - L) & ~(<usize>15));
  const psiRow = (<usize>(k * 2 * wx)) << 2;
  const rightShift = L - R;
  psvNormalRun(k, 0, L, true, pPx2 + psiRow, Z, false, none);
  psvNormalRun(k, L, whole, false, 0, Z, false, none);
  psvNormalRun(k, R, E, true, pPx2 + psiRow + rightShift, Z, false, none);
  psvShearRun(k, 0, L, true, pPx3 + psiRow, Z, false, none);
  psvShearRun(k, L, whole, false, 0, Z, false, none);
  psvShearRun(k, R, E, true, pPx3 + psiRow + rightShift, Z, false, none);
  if (whole < R) {
    const keep = v128.load(K_KEEP + (((R - whole) - 4) << 2));
    psvNormalRun(k, whole, whole + 16, false, 0, Z, true, keep);
    psvShearRun(k, whole, whole + 16, false, 0, Z, true, keep);
  }
}

/** Velocity update of row j (vx, vz) with its absorbing terms. */
function psvVelocityFull(j: i32): void {
  const none = v128.splat<i32>(0);
  if (wx == 0) {
    const n = (<usize>nxv) << 2;
    psvVxRun(j, 0, n, false, 0, false, false, none);
    psvVzRun(j, 0, n, false, 0, false, false, none);
  } else if (inZStrip(j)) psvVelocitySegments(j, true);
  else psvVelocitySegments(j, false);
}

/** Stress update of row k (sxx, szz, sxz) with its absorbing terms; the free-surface row by its own passes. */
function psvStressFull(k: i32): void {
  const none = v128.splat<i32>(0);
  if (freeSurface && k == 0) {
    psvStressSurfaceRow();
    psvStressPml(k);
  } else if (wx == 0) {
    const n = (<usize>nxv) << 2;
    psvNormalRun(k, 0, n, false, 0, false, false, none);
    psvShearRun(k, 0, n, false, 0, false, false, none);
  } else if (inZStrip(k)) psvStressSegments(k, true);
  else psvStressSegments(k, false);
}

/** Stress update of the free-surface row (row 0): szz = 0, sxx with the surface modulus, sxz as elsewhere. */
function psvStressSurfaceRow(): void {
  const c1 = f32x4.splat(C1);
  const c2 = f32x4.splat(C2);
  const r = rb;
  const base = org;
  const end = base + ((<usize>nxv) << 2);
  for (let o = base; o < end; o += 16) {
    const pv = pF0 + o - 8;
    const vm2 = v128.load(pv);
    const vm1 = v128.load(pv, 4);
    const v0 = v128.load(pv, 8);
    const v1 = v128.load(pv, 12);
    const dxvx = f32x4.add(f32x4.mul(c1, f32x4.sub(v0, vm1)), f32x4.mul(c2, f32x4.sub(v1, vm2)));
    const w0 = v128.load(pF1 + o);
    const ll = v128.load(pM3 + o);
    const psx = pF2 + o;
    // szz = 0 at the surface, so d vz/dz = -(lambda/M) d vx/dx and sxx grows with M - lambda^2/M,
    // which the driver stores in the lambda array on this row.
    v128.store(psx, ftz(f32x4.add(v128.load(psx), f32x4.mul(ll, dxvx))));
    v128.store(pF3 + o, f32x4.splat(0));
    const px = pF0 + o;
    const xp1 = v128.load(px + r);
    const xp2 = v128.load(px + 2 * r);
    const xm1 = v128.load(px - r);
    const dzvx = f32x4.add(f32x4.mul(c1, f32x4.sub(xp1, v0)), f32x4.mul(c2, f32x4.sub(xp2, xm1)));
    const pu = pF1 + o - 4;
    const um1 = v128.load(pu);
    const u1 = v128.load(pu, 8);
    const u2 = v128.load(pu, 12);
    const dxvz = f32x4.add(f32x4.mul(c1, f32x4.sub(u1, w0)), f32x4.mul(c2, f32x4.sub(u2, um1)));
    const pq = pF4 + o;
    v128.store(pq, ftz(f32x4.add(v128.load(pq), f32x4.mul(v128.load(pM4 + o), f32x4.add(dzvx, dxvz)))));
  }
}

// PML of the free-surface row: sxx, szz get d vx/dx (integer x) and d vz/dz (integer z); sxz gets
// d vx/dz (half z), d vz/dx (half x). (The velocity terms: vx gets d sxx/dx (half x) and d sxz/dz
// (integer z); vz gets d sxz/dx (integer x), d szz/dz (half z); see the row segments above.)
function psvStressPml(j: i32): void {
  pmlXRow(0, pF0, pPx2, pAxI, pBxI, pF2, pM2, pF3, pM3, j);
  pmlZRowIf(0, pF1, pPz2, pAzI, pBzI, pF2, pM3, pF3, pM2, j);
  pmlZRowIf(1, pF0, pPz3, pAzH, pBzH, pF4, pM4, 0, 0, j);
  pmlXRow(1, pF1, pPx3, pAxH, pBxH, pF4, pM4, 0, 0, j);
}

function psvSurface(): void {
  const r = rb;
  const n4 = <usize>nx << 2;
  for (let o: usize = 0; o < n4; o += 4) {
    const a = org + o;
    store<f32>(pF3 + a, 0);
    store<f32>(pF3 + a - r, -load<f32>(pF3 + a + r));
    store<f32>(pF3 + a - 2 * r, -load<f32>(pF3 + a + 2 * r));
    store<f32>(pF4 + a - r, -load<f32>(pF4 + a));
    store<f32>(pF4 + a - 2 * r, -load<f32>(pF4 + a + r));
  }
}

/** One P-SV time step: velocities, then stresses (with PML terms), then the free surface. */
export function psvStep(): void {
  const total = nrows + LAG;
  for (let j = 0; j < total; j++) {
    if (j < nrows) psvVelocityFull(j);
    const k = j - LAG;
    if (k >= 0) psvStressFull(k);
  }
  if (freeSurface) psvSurface();
}

// ---------------------------------------------------------------------------------------------
// SH

/** Velocity update of row j: vy from sxy, syz. */
@inline
function shVelocityRow(j: i32): void {
  const c1 = f32x4.splat(C1);
  const c2 = f32x4.splat(C2);
  const r = rb;
  const base = org + <usize>j * r;
  const end = base + ((<usize>nxv) << 2);
  for (let o = base; o < end; o += 16) {
    // d sxy/dx at i: sxy(i)-sxy(i-1), sxy(i+1)-sxy(i-2)
    const ps = pF1 + o - 8;
    const sm2 = v128.load(ps);
    const sm1 = v128.load(ps, 4);
    const s0 = v128.load(ps, 8);
    const s1 = v128.load(ps, 12);
    const dx = f32x4.add(f32x4.mul(c1, f32x4.sub(s0, sm1)), f32x4.mul(c2, f32x4.sub(s1, sm2)));
    // d syz/dz at j: syz(j)-syz(j-1), syz(j+1)-syz(j-2)
    const pq = pF2 + o;
    const q0 = v128.load(pq);
    const qm1 = v128.load(pq - r);
    const qm2 = v128.load(pq - 2 * r);
    const qp1 = v128.load(pq + r);
    const dz = f32x4.add(f32x4.mul(c1, f32x4.sub(q0, qm1)), f32x4.mul(c2, f32x4.sub(qp1, qm2)));
    const pv = pF0 + o;
    v128.store(pv, ftz(f32x4.add(v128.load(pv), f32x4.mul(v128.load(pM0 + o), f32x4.add(dx, dz)))));
  }
}

/** Stress update of row j: sxy, syz from vy. */
@inline
function shStressRow(j: i32): void {
  const c1 = f32x4.splat(C1);
  const c2 = f32x4.splat(C2);
  const r = rb;
  const base = org + <usize>j * r;
  const end = base + ((<usize>nxv) << 2);
  for (let o = base; o < end; o += 16) {
    // d vy/dx at i+1/2: vy(i+1)-vy(i), vy(i+2)-vy(i-1)
    const pv = pF0 + o - 4;
    const vm1 = v128.load(pv);
    const v0 = v128.load(pv, 4);
    const v1 = v128.load(pv, 8);
    const v2 = v128.load(pv, 12);
    const dx = f32x4.add(f32x4.mul(c1, f32x4.sub(v1, v0)), f32x4.mul(c2, f32x4.sub(v2, vm1)));
    const p1 = pF1 + o;
    v128.store(p1, ftz(f32x4.add(v128.load(p1), f32x4.mul(v128.load(pM1 + o), dx))));
    // d vy/dz at j+1/2: vy(j+1)-vy(j), vy(j+2)-vy(j-1)
    const pw = pF0 + o;
    const wp1 = v128.load(pw + r);
    const wp2 = v128.load(pw + 2 * r);
    const wm1 = v128.load(pw - r);
    const dz = f32x4.add(f32x4.mul(c1, f32x4.sub(wp1, v0)), f32x4.mul(c2, f32x4.sub(wp2, wm1)));
    const p2 = pF2 + o;
    v128.store(p2, ftz(f32x4.add(v128.load(p2), f32x4.mul(v128.load(pM2 + o), dz))));
  }
}

function shSurface(): void {
  // syz = 0 at z = 0 (the vy row): syz(-1/2) = -syz(1/2), syz(-3/2) = -syz(3/2).
  const r = rb;
  const n4 = <usize>nx << 2;
  for (let o: usize = 0; o < n4; o += 4) {
    const a = pF2 + org + o;
    store<f32>(a - r, -load<f32>(a));
    store<f32>(a - 2 * r, -load<f32>(a + r));
  }
}

/** SH velocity row j with its PML terms. */
function shVelocityFull(j: i32): void {
  shVelocityRow(j);
  pmlXRow(0, pF1, pPx0, pAxI, pBxI, pF0, pM0, 0, 0, j);
  pmlZRowIf(0, pF2, pPz0, pAzI, pBzI, pF0, pM0, 0, 0, j);
}

/** SH stress row k with its PML terms. */
function shStressFull(k: i32): void {
  shStressRow(k);
  pmlXRow(1, pF0, pPx1, pAxH, pBxH, pF1, pM1, 0, 0, k);
  pmlZRowIf(1, pF0, pPz1, pAzH, pBzH, pF2, pM2, 0, 0, k);
}

/** One SH time step: velocity, then stresses (with PML terms), then the free surface. */
export function shStep(): void {
  const total = nrows + LAG;
  for (let j = 0; j < total; j++) {
    if (j < nrows) shVelocityFull(j);
    const k = j - LAG;
    if (k >= 0) shStressFull(k);
  }
  if (freeSurface) shSurface();
}

// ---------------------------------------------------------------------------------------------
// Several time steps in one pass over the rows, with the sources and receivers of a shot.
//
// Step n+1 follows step n at SKEW rows' distance: its velocity row j reads the stresses of rows
// j-2 .. j+2, which step n has finished (its stress rows run LAG rows behind its velocity rows),
// and it overwrites velocities that no unfinished stress row of step n still reads. The free
// surface of step n is imaged as soon as its stress rows 0 .. 2 are final (nothing else reads the
// mirrored rows within the step). So every cell sees the same operations in the same order as
// step after step, while the rows of STAGES steps stay in cache together.
//
// A source cell of step n gets its increment just before step n first reads it: a velocity cell
// before step n updates its row; a stress cell before step n's velocity row two above it (after
// step n-1 has finished the cell, its surface image included). A receiver cell is captured right
// after step n has updated its row, before step n+1 touches it.
//
// SKEW = LAG + 2: step n has finished its stress rows up to j + SKEW - LAG = j + 2 when step n+1
// updates velocity row j, and its unfinished stress rows (from j + 3) read velocity rows from j + 1.
const SKEW = LAG + 2;
/** Steps per pass (at most MAX_STAGES). */
const STAGES = 4;
const MAX_STAGES = 8;

// Shot table (written by the driver, read by configureShot), byte addresses.
let nSrc: i32 = 0;
let pSrc: usize = 0; // [nSrc] of (byte address, inject row, mirror byte address or 0), sorted by inject row
let pInc: usize = 0; // f32 [step of the call][nSrc]
let srcFrom: i32 = 0; // first step that gets an increment
let nRec: i32 = 0;
let pRec: usize = 0; // [nRec] of (byte address, row, slot), sorted by row
let pCap: usize = 0; // f32 [step of the call][nRec]
// Per-stage cursors into the sorted source and receiver tables.
const CUR_SRC = memory.data(MAX_STAGES * 4, 16);
const CUR_REC = memory.data(MAX_STAGES * 4, 16);

/** Reads the shot table the driver wrote at `table` (i32 entries). */
export function configureShot(table: usize): void {
  nSrc = load<i32>(table, 0);
  pSrc = <usize>load<i32>(table, 4);
  pInc = <usize>load<i32>(table, 8);
  srcFrom = load<i32>(table, 12);
  nRec = load<i32>(table, 16);
  pRec = <usize>load<i32>(table, 20);
  pCap = <usize>load<i32>(table, 24);
}

/** Adds step n's increments to the source cells whose inject row is `row` (stage t's cursor). */
@inline
function injectRow(t: i32, row: i32, n: i32, callStep: i32): void {
  const cp = CUR_SRC + (<usize>t << 2);
  let c = load<i32>(cp);
  while (c < nSrc) {
    const e = pSrc + <usize>c * 12;
    if (load<i32>(e, 4) != row) break;
    if (n >= srcFrom) {
      const a = <usize>load<i32>(e);
      const v = load<f32>(a) + load<f32>(pInc + ((<usize>(callStep * nSrc + c)) << 2));
      // Flush to zero as everywhere: |v| below 2^-100 becomes +0; NaN passes.
      const w: f32 = Mathf.abs(v) < FLUSH_BELOW ? 0 : v;
      store<f32>(a, w);
      const m = <usize>load<i32>(e, 8);
      if (m != 0) store<f32>(m, -w);
    }
    c++;
  }
  store<i32>(cp, c);
}

/** Captures the receiver cells of `row` after stage t's velocity update. */
@inline
function captureRow(t: i32, row: i32, callStep: i32): void {
  const cp = CUR_REC + (<usize>t << 2);
  let c = load<i32>(cp);
  const out = pCap + ((<usize>(callStep * nRec)) << 2);
  while (c < nRec) {
    const e = pRec + <usize>c * 12;
    if (load<i32>(e, 4) != row) break;
    store<f32>(out + ((<usize>load<i32>(e, 8)) << 2), load<f32>(<usize>load<i32>(e)));
    c++;
  }
  store<i32>(cp, c);
}

/** Runs steps first .. first+count-1 in passes of up to STAGES steps (P-SV when psv, else SH). */
function advance(psv: bool, first: i32, count: i32): void {
  for (let done = 0; done < count; done += STAGES) {
    const T = min(STAGES, count - done);
    for (let t = 0; t < T; t++) {
      store<i32>(CUR_SRC + (<usize>t << 2), 0);
      store<i32>(CUR_REC + (<usize>t << 2), 0);
    }
    const total = nrows + LAG + SKEW * (T - 1);
    for (let j = 0; j < total; j++) {
      for (let t = 0; t < T; t++) {
        const jj = j - SKEW * t;
        if (jj < 0) break;
        const callStep = done + t;
        if (jj < nrows) {
          injectRow(t, jj, first + callStep, callStep);
          if (psv) {
            psvVelocityFull(jj);
          } else {
            shVelocityFull(jj);
          }
          captureRow(t, jj, callStep);
        }
        const k = jj - LAG;
        if (k >= 0 && k < nrows) {
          if (psv) {
            psvStressFull(k);
            if (freeSurface && k == 2) psvSurface();
          } else {
            shStressFull(k);
            if (freeSurface && k == 2) shSurface();
          }
        }
      }
    }
  }
}

/** P-SV steps first .. first+count-1 with the shot's sources and receivers (see configureShot). */
export function psvAdvance(first: i32, count: i32): void {
  advance(true, first, count);
}

/** SH steps first .. first+count-1 with the shot's sources and receivers (see configureShot). */
export function shAdvance(first: i32, count: i32): void {
  advance(false, first, count);
}

// ---------------------------------------------------------------------------------------------
// Convolutional PML terms on the absorbing strips, four cells at a time (strip widths are
// multiples of 4). The derivative of `src` at the position shifted by `sh` (0: backward, element i
// between i-1 and i; 1: forward, between i and i+1): c1 (s[k]-s[k-1]) + c2 (s[k+1]-s[k-2]), k = i + sh.

/** One absorbing x strip of row `rowOff` from column `col` (psi slot `slot`), `wx` columns. */
@inline
function pmlXSpan(sh: i32, src: usize, psiRow: usize, a: usize, b: usize,
  f1: usize, m1: usize, f2: usize, m2: usize, rowOff: usize, col: i32, slot: i32, surface: bool): void {
  const c1 = v128.load(K_C1);
  const c2 = v128.load(K_C2);
  const absMask = v128.load(K_ABS);
  const flush = v128.load(K_FLUSH);
  const co = <usize>col << 2;
  const s = src + rowOff + co + (<usize>sh << 2) - 8; // columns i-2 .. i+1 of the shifted position at byte offsets 0 .. 12
  const pp = psiRow + (<usize>slot << 2);
  const pa = a + co;
  const pb = b + co;
  const q1 = f1 + rowOff + co;
  const n = <usize>wx << 2;
  if (surface) {
    // Free-surface row of the normal stresses: sxx with the surface modulus (held in m2), szz stays 0.
    const k1 = m2 + rowOff + co;
    for (let o: usize = 0; o < n; o += 16) {
      const d = f32x4.add(
        f32x4.mul(c1, f32x4.sub(v128.load(s + o, 8), v128.load(s + o, 4))),
        f32x4.mul(c2, f32x4.sub(v128.load(s + o, 12), v128.load(s + o))),
      );
      const v = ftzk(f32x4.add(f32x4.mul(v128.load(pb + o), v128.load(pp + o)), f32x4.mul(v128.load(pa + o), d)), absMask, flush);
      v128.store(pp + o, v);
      v128.store(q1 + o, ftzk(f32x4.add(v128.load(q1 + o), f32x4.mul(v128.load(k1 + o), v)), absMask, flush));
    }
  } else if (f2 == 0) {
    const k1 = m1 + rowOff + co;
    for (let o: usize = 0; o < n; o += 16) {
      const d = f32x4.add(
        f32x4.mul(c1, f32x4.sub(v128.load(s + o, 8), v128.load(s + o, 4))),
        f32x4.mul(c2, f32x4.sub(v128.load(s + o, 12), v128.load(s + o))),
      );
      const v = ftzk(f32x4.add(f32x4.mul(v128.load(pb + o), v128.load(pp + o)), f32x4.mul(v128.load(pa + o), d)), absMask, flush);
      v128.store(pp + o, v);
      v128.store(q1 + o, ftzk(f32x4.add(v128.load(q1 + o), f32x4.mul(v128.load(k1 + o), v)), absMask, flush));
    }
  } else {
    const k1 = m1 + rowOff + co;
    const q2 = f2 + rowOff + co;
    const k2 = m2 + rowOff + co;
    for (let o: usize = 0; o < n; o += 16) {
      const d = f32x4.add(
        f32x4.mul(c1, f32x4.sub(v128.load(s + o, 8), v128.load(s + o, 4))),
        f32x4.mul(c2, f32x4.sub(v128.load(s + o, 12), v128.load(s + o))),
      );
      const v = ftzk(f32x4.add(f32x4.mul(v128.load(pb + o), v128.load(pp + o)), f32x4.mul(v128.load(pa + o), d)), absMask, flush);
      v128.store(pp + o, v);
      v128.store(q1 + o, ftzk(f32x4.add(v128.load(q1 + o), f32x4.mul(v128.load(k1 + o), v)), absMask, flush));
      v128.store(q2 + o, ftzk(f32x4.add(v128.load(q2 + o), f32x4.mul(v128.load(k2 + o), v)), absMask, flush));
    }
  }
}

function pmlXRow(sh: i32, src: usize, psi: usize, a: usize, b: usize,
  f1: usize, m1: usize, f2: usize, m2: usize, j: i32): void {
  if (wx == 0) return;
  const rowOff = org + <usize>j * rb;
  const psiRow = psi + ((<usize>(j * 2 * wx)) << 2);
  const surface = freeSurface && j == 0 && f2 != 0;
  pmlXSpan(sh, src, psiRow, a, b, f1, m1, f2, m2, rowOff, 0, 0, surface);
  pmlXSpan(sh, src, psiRow, a, b, f1, m1, f2, m2, rowOff, nx - wx, wx, surface);
}

@inline
function pmlZRow(sh: i32, src: usize, psi: usize, a: usize, b: usize,
  f1: usize, m1: usize, f2: usize, m2: usize, j: i32, sj: i32): void {
  const c1 = v128.load(K_C1);
  const c2 = v128.load(K_C2);
  const absMask = v128.load(K_ABS);
  const flush = v128.load(K_FLUSH);
  const r = rb;
  const row = org + <usize>j * r;
  const s0 = src + row + <usize>sh * r;
  const sM1 = s0 - r;
  const sP1 = s0 + r;
  const sM2 = s0 - 2 * r;
  const pr = psi + ((<usize>(sj * nxv)) << 2);
  const av = v128.load32_splat(a + (<usize>j << 2));
  const bv = v128.load32_splat(b + (<usize>j << 2));
  const q1 = f1 + row;
  const k1 = m1 + row;
  // Padding columns up to nxv have zero fields and moduli: their terms stay zero.
  const n = <usize>nxv << 2;
  if (f2 == 0) {
    for (let o: usize = 0; o < n; o += 16) {
      const d = f32x4.add(
        f32x4.mul(c1, f32x4.sub(v128.load(s0 + o), v128.load(sM1 + o))),
        f32x4.mul(c2, f32x4.sub(v128.load(sP1 + o), v128.load(sM2 + o))),
      );
      const v = ftzk(f32x4.add(f32x4.mul(bv, v128.load(pr + o)), f32x4.mul(av, d)), absMask, flush);
      v128.store(pr + o, v);
      v128.store(q1 + o, ftzk(f32x4.add(v128.load(q1 + o), f32x4.mul(v128.load(k1 + o), v)), absMask, flush));
    }
  } else {
    const q2 = f2 + row;
    const k2 = m2 + row;
    for (let o: usize = 0; o < n; o += 16) {
      const d = f32x4.add(
        f32x4.mul(c1, f32x4.sub(v128.load(s0 + o), v128.load(sM1 + o))),
        f32x4.mul(c2, f32x4.sub(v128.load(sP1 + o), v128.load(sM2 + o))),
      );
      const v = ftzk(f32x4.add(f32x4.mul(bv, v128.load(pr + o)), f32x4.mul(av, d)), absMask, flush);
      v128.store(pr + o, v);
      v128.store(q1 + o, ftzk(f32x4.add(v128.load(q1 + o), f32x4.mul(v128.load(k1 + o), v)), absMask, flush));
      v128.store(q2 + o, ftzk(f32x4.add(v128.load(q2 + o), f32x4.mul(v128.load(k2 + o), v)), absMask, flush));
    }
  }
}

function pmlZRowIf(sh: i32, src: usize, psi: usize, a: usize, b: usize,
  f1: usize, m1: usize, f2: usize, m2: usize, j: i32): void {
  const bottom = nrows - wzBot;
  if (j < wzTop) pmlZRow(sh, src, psi, a, b, f1, m1, f2, m2, j, j);
  else if (j >= bottom) pmlZRow(sh, src, psi, a, b, f1, m1, f2, m2, j, j - bottom + wzTop);
}
