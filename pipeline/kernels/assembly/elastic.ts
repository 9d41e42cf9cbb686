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
// their order are those of a velocity pass over the whole grid followed by a stress pass.
const LAG = 3;

// ---------------------------------------------------------------------------------------------
// P-SV

/** Velocity update of four cells at byte offset `o` of the row (see psvVelocityRow). */
@inline
function psvVelocityQuad(c1: v128, c2: v128, absMask: v128, flush: v128, sxx: usize, sxz: usize, sxzM1: usize, sxzM2: usize, sxzP1: usize, szz: usize, szzM1: usize, szzP1: usize, szzP2: usize, vx: usize, vz: usize, bx: usize, bz: usize, o: usize): void {
  // vx at (i+1/2, j): d sxx/dx + d sxz/dz
  const xm1 = v128.load(sxx + o);
  const x0 = v128.load(sxx + o, 4);
  const x1 = v128.load(sxx + o, 8);
  const x2 = v128.load(sxx + o, 12);
  const dxx = f32x4.add(f32x4.mul(c1, f32x4.sub(x1, x0)), f32x4.mul(c2, f32x4.sub(x2, xm1)));
  const q0 = v128.load(sxz + o, 8);
  const dzq = f32x4.add(
    f32x4.mul(c1, f32x4.sub(q0, v128.load(sxzM1 + o))),
    f32x4.mul(c2, f32x4.sub(v128.load(sxzP1 + o), v128.load(sxzM2 + o))),
  );
  v128.store(vx + o, ftzk(f32x4.add(v128.load(vx + o), f32x4.mul(v128.load(bx + o), f32x4.add(dxx, dzq))), absMask, flush));
  // vz at (i, j+1/2): d sxz/dx + d szz/dz
  const dxq = f32x4.add(
    f32x4.mul(c1, f32x4.sub(q0, v128.load(sxz + o, 4))),
    f32x4.mul(c2, f32x4.sub(v128.load(sxz + o, 12), v128.load(sxz + o))),
  );
  const dzz = f32x4.add(
    f32x4.mul(c1, f32x4.sub(v128.load(szzP1 + o), v128.load(szz + o))),
    f32x4.mul(c2, f32x4.sub(v128.load(szzP2 + o), v128.load(szzM1 + o))),
  );
  v128.store(vz + o, ftzk(f32x4.add(v128.load(vz + o), f32x4.mul(v128.load(bz + o), f32x4.add(dxq, dzz))), absMask, flush));
}

/** Velocity update of row j: vx, vz from the stresses. */
function psvVelocityRow(j: i32): void {
  const c1 = v128.load(K_C1);
  const c2 = v128.load(K_C2);
  const absMask = v128.load(K_ABS);
  const flush = v128.load(K_FLUSH);
  const r = rb;
  const base = org + <usize>j * r;
  const n = (<usize>nxv) << 2;
  // Row pointers, set once per row (a global is read again at every use inside a loop).
  const sxx = pF2 + base - 4; // columns i-1 .. i+2 at byte offsets 0 .. 12
  const sxz = pF4 + base - 8; // columns i-2 .. i+1 at byte offsets 0 .. 12
  const sxzM1 = sxz + 8 - r;
  const sxzM2 = sxz + 8 - 2 * r;
  const sxzP1 = sxz + 8 + r;
  const szz = pF3 + base;
  const szzM1 = szz - r;
  const szzP1 = szz + r;
  const szzP2 = szz + 2 * r;
  const vx = pF0 + base;
  const vz = pF1 + base;
  const bx = pM0 + base;
  const bz = pM1 + base;
  // Two groups of four per iteration: half the loop overhead.
  let o: usize = 0;
  for (; o + 16 < n; o += 32) {
    psvVelocityQuad(c1, c2, absMask, flush, sxx, sxz, sxzM1, sxzM2, sxzP1, szz, szzM1, szzP1, szzP2, vx, vz, bx, bz, o);
    psvVelocityQuad(c1, c2, absMask, flush, sxx, sxz, sxzM1, sxzM2, sxzP1, szz, szzM1, szzP1, szzP2, vx, vz, bx, bz, o + 16);
  }
  if (o < n) psvVelocityQuad(c1, c2, absMask, flush, sxx, sxz, sxzM1, sxzM2, sxzP1, szz, szzM1, szzP1, szzP2, vx, vz, bx, bz, o);
}

/** Stress update of four cells at byte offset `o` of the row (see psvStressRow). */
@inline
function psvStressQuad(c1: v128, c2: v128, absMask: v128, flush: v128, vx: usize, vxM1: usize, vxP1: usize, vxP2: usize, vz: usize, vzM1: usize, vzM2: usize, vzP1: usize, sxx: usize, szz: usize, sxz: usize, mm: usize, ll: usize, mu: usize, o: usize): void {
    // d vx/dx at i: vx(i)-vx(i-1), vx(i+1)-vx(i-2)
    const v0 = v128.load(vx + o, 8);
    const dxvx = f32x4.add(
      f32x4.mul(c1, f32x4.sub(v0, v128.load(vx + o, 4))),
      f32x4.mul(c2, f32x4.sub(v128.load(vx + o, 12), v128.load(vx + o))),
    );
    // d vz/dz at j: vz(j)-vz(j-1), vz(j+1)-vz(j-2)
    const w0 = v128.load(vz + o, 4);
    const dzvz = f32x4.add(
      f32x4.mul(c1, f32x4.sub(w0, v128.load(vzM1 + o))),
      f32x4.mul(c2, f32x4.sub(v128.load(vzP1 + o), v128.load(vzM2 + o))),
    );
    const m = v128.load(mm + o);
    const l = v128.load(ll + o);
    v128.store(sxx + o, ftzk(f32x4.add(v128.load(sxx + o), f32x4.add(f32x4.mul(m, dxvx), f32x4.mul(l, dzvz))), absMask, flush));
    v128.store(szz + o, ftzk(f32x4.add(v128.load(szz + o), f32x4.add(f32x4.mul(l, dxvx), f32x4.mul(m, dzvz))), absMask, flush));
    // sxz at (i+1/2, j+1/2): d vx/dz = vx(j+1)-vx(j), vx(j+2)-vx(j-1); d vz/dx = vz(i+1)-vz(i), vz(i+2)-vz(i-1)
    const dzvx = f32x4.add(
      f32x4.mul(c1, f32x4.sub(v128.load(vxP1 + o), v0)),
      f32x4.mul(c2, f32x4.sub(v128.load(vxP2 + o), v128.load(vxM1 + o))),
    );
    const dxvz = f32x4.add(
      f32x4.mul(c1, f32x4.sub(v128.load(vz + o, 8), w0)),
      f32x4.mul(c2, f32x4.sub(v128.load(vz + o, 12), v128.load(vz + o))),
    );
    v128.store(sxz + o, ftzk(f32x4.add(v128.load(sxz + o), f32x4.mul(v128.load(mu + o), f32x4.add(dzvx, dxvz))), absMask, flush));
}

/** Stress update of row j (not a free-surface row): sxx, szz, sxz from the velocities. */
function psvStressRow(j: i32): void {
  const c1 = v128.load(K_C1);
  const c2 = v128.load(K_C2);
  const absMask = v128.load(K_ABS);
  const flush = v128.load(K_FLUSH);
  const r = rb;
  const base = org + <usize>j * r;
  const n = (<usize>nxv) << 2;
  const vx = pF0 + base - 8; // columns i-2 .. i+1 at byte offsets 0 .. 12
  const vxM1 = vx + 8 - r;
  const vxP1 = vx + 8 + r;
  const vxP2 = vx + 8 + 2 * r;
  const vz = pF1 + base - 4; // columns i-1 .. i+2 at byte offsets 0 .. 12
  const vzM1 = vz + 4 - r;
  const vzM2 = vz + 4 - 2 * r;
  const vzP1 = vz + 4 + r;
  const sxx = pF2 + base;
  const szz = pF3 + base;
  const sxz = pF4 + base;
  const mm = pM2 + base;
  const ll = pM3 + base;
  const mu = pM4 + base;
  let o: usize = 0;
  for (; o + 16 < n; o += 32) {
    psvStressQuad(c1, c2, absMask, flush, vx, vxM1, vxP1, vxP2, vz, vzM1, vzM2, vzP1, sxx, szz, sxz, mm, ll, mu, o);
    psvStressQuad(c1, c2, absMask, flush, vx, vxM1, vxP1, vxP2, vz, vzM1, vzM2, vzP1, sxx, szz, sxz, mm, ll, mu, o + 16);
  }
  if (o < n) psvStressQuad(c1, c2, absMask, flush, vx, vxM1, vxP1, vxP2, vz, vzM1, vzM2, vzP1, sxx, szz, sxz, mm, ll, mu, o);
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

// PML: vx gets d sxx/dx (half x) and d sxz/dz (integer z); vz gets d sxz/dx (integer x), d szz/dz (half z).
function psvVelocityPml(j: i32): void {
  pmlXRow(1, pF2, pPx0, pAxH, pBxH, pF0, pM0, 0, 0, j);
  pmlXRow(0, pF4, pPx1, pAxI, pBxI, pF1, pM1, 0, 0, j);
  pmlZRowIf(0, pF4, pPz0, pAzI, pBzI, pF0, pM0, 0, 0, j);
  pmlZRowIf(1, pF3, pPz1, pAzH, pBzH, pF1, pM1, 0, 0, j);
}

// PML: sxx, szz get d vx/dx (integer x) and d vz/dz (integer z); sxz gets d vx/dz (half z), d vz/dx (half x).
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
    if (j < nrows) {
      psvVelocityRow(j);
      psvVelocityPml(j);
    }
    const k = j - LAG;
    if (k >= 0) {
      if (freeSurface && k == 0) psvStressSurfaceRow();
      else psvStressRow(k);
      psvStressPml(k);
    }
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

const SKEW = 5;
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
            psvVelocityRow(jj);
            psvVelocityPml(jj);
          } else {
            shVelocityFull(jj);
          }
          captureRow(t, jj, callStep);
        }
        const k = jj - LAG;
        if (k >= 0 && k < nrows) {
          if (psv) {
            if (freeSurface && k == 0) psvStressSurfaceRow();
            else psvStressRow(k);
            psvStressPml(k);
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
