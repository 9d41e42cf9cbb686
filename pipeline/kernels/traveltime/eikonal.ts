/**
 * First-arrival travel times on a regular grid by fast sweeping (Zhao 2005, "A fast sweeping
 * method for Eikonal equations", Math. Comp. 74, 603–627) with the first-order Godunov upwind
 * update of that paper in 2D (as recalled, from memory; the tests check it against closed forms):
 *
 *   a = min(T[i−1,j], T[i+1,j]), b = min(T[i,j−1], T[i,j+1]), f = slowness · h,
 *   T̄ = min(a, b) + f                              when |a − b| ≥ f,
 *   T̄ = (a + b + √(2f² − (a − b)²)) / 2            otherwise;   T[i,j] ← min(T[i,j], T̄),
 *
 * swept in the four alternating orderings until no node changes.
 *
 * The point-source singularity makes a plain first-order scheme lose accuracy everywhere
 * (error ~ h·log r). Two remedies are offered:
 * - `"factored"` (default): the multiplicative factorisation T = T₀·τ with T₀ = s₀·|x − x_s|
 *   (Fomel, Luo & Zhao 2009, "Fast sweeping method for the factored eikonal equation",
 *   J. Comput. Phys. 228, 6440–6455); τ is smooth near the source and solved by the same
 *   upwind sweeping: (τ·∂ₓT₀ + T₀·∂ₓτ)² + (τ·∂_zT₀ + T₀·∂_zτ)² = s², with one-sided differences of
 *   τ towards the upwind neighbours, the causal (larger) root, and the one-sided updates as
 *   fallback.
 * - `"first-order"`: the plain Godunov update above with exact times T = s₀·r in a box of
 *   `initRadiusCells` around the source (common practice: local analytic initialisation).
 *
 * Layout: slowness and times are flat row-major `[z][x]` on grid nodes (node (ix, iz) at
 * x = ix·h, z = iz·h relative to the grid origin), as the elastic model stores its grids.
 */

/** Settings of {@link eikonalTimes}. */
export interface EikonalOptions {
  /** Update scheme; see the module notes. @default "factored" */
  scheme?: "factored" | "first-order";
  /** Half width of the box of nodes given exact homogeneous times around the source, in cells. @default 2 */
  initRadiusCells?: number;
  /** Upper bound on the number of sweep rounds (four orderings each). @default 50 */
  maxRounds?: number;
  /** A round that changes no node by more than this (s) ends the iteration. @default 1e-9 */
  toleranceS?: number;
}

/** Grid geometry of a travel-time problem. */
export interface TravelTimeGrid {
  /** Nodes along x. */
  nx: number;
  /** Nodes along z (depth, positive down). */
  nz: number;
  /** Node spacing, m (square cells). */
  spacingM: number;
}

/** Outcome of {@link eikonalTimes}. */
export interface EikonalResult {
  /** First-arrival times, s, flat `[z][x]`. */
  times: Float64Array;
  /** Sweep rounds done (four orderings each). */
  rounds: number;
}

function checkGrid(grid: TravelTimeGrid, slowness: ArrayLike<number>): void {
  const { nx, nz, spacingM } = grid;
  if (!Number.isInteger(nx) || nx < 2) throw new RangeError(`nx must be an integer ≥ 2, got ${nx}`);
  if (!Number.isInteger(nz) || nz < 2) throw new RangeError(`nz must be an integer ≥ 2, got ${nz}`);
  if (!(spacingM > 0) || !Number.isFinite(spacingM)) throw new RangeError(`spacingM must be a positive finite number, got ${spacingM}`);
  if (slowness.length !== nx * nz) throw new RangeError(`slowness must have nx·nz = ${nx * nz} values, got ${slowness.length}`);
  for (let k = 0; k < slowness.length; k++) {
    const s = slowness[k];
    if (!(s > 0) || !Number.isFinite(s)) throw new RangeError(`slowness[${k}] must be positive and finite, got ${s}`);
  }
}

/** Bilinear interpolation of a node field at (x, z) in metres from the grid origin (clamped to the grid). */
export function interpolateNodes(field: ArrayLike<number>, grid: TravelTimeGrid, x: number, z: number): number {
  const { nx, nz, spacingM: h } = grid;
  const fx = Math.min(Math.max(x / h, 0), nx - 1);
  const fz = Math.min(Math.max(z / h, 0), nz - 1);
  const ix = Math.min(Math.floor(fx), nx - 2);
  const iz = Math.min(Math.floor(fz), nz - 2);
  const u = fx - ix;
  const w = fz - iz;
  const k = iz * nx + ix;
  return (1 - w) * ((1 - u) * field[k] + u * field[k + 1]) + w * ((1 - u) * field[k + nx] + u * field[k + nx + 1]);
}

/**
 * First-arrival times from a point source at (sourceX, sourceZ) (m from the grid origin, inside
 * the grid) through the node slowness field `slowness` (s/m, `[z][x]`). Pass `out` to reuse a buffer.
 */
export function eikonalTimes(
  slowness: ArrayLike<number>,
  grid: TravelTimeGrid,
  sourceX: number,
  sourceZ: number,
  options: EikonalOptions = {},
  out?: Float64Array,
): EikonalResult {
  checkGrid(grid, slowness);
  const { nx, nz, spacingM: h } = grid;
  const xMax = (nx - 1) * h;
  const zMax = (nz - 1) * h;
  if (!(sourceX >= -1e-9 * h && sourceX <= xMax + 1e-9 * h)) throw new RangeError(`sourceX must lie on the grid (0 … ${xMax} m), got ${sourceX}`);
  if (!(sourceZ >= -1e-9 * h && sourceZ <= zMax + 1e-9 * h)) throw new RangeError(`sourceZ must lie on the grid (0 … ${zMax} m), got ${sourceZ}`);
  const scheme = options.scheme ?? "factored";
  if (scheme !== "factored" && scheme !== "first-order") throw new RangeError(`scheme must be "factored" or "first-order", got ${String(scheme)}`);
  const radius = options.initRadiusCells ?? 2;
  if (!(radius >= 1) || !Number.isFinite(radius)) throw new RangeError(`initRadiusCells must be ≥ 1, got ${radius}`);
  const maxRounds = options.maxRounds ?? 50;
  if (!Number.isInteger(maxRounds) || maxRounds < 1) throw new RangeError(`maxRounds must be an integer ≥ 1, got ${maxRounds}`);
  const tol = options.toleranceS ?? 1e-9;
  if (!(tol >= 0)) throw new RangeError(`toleranceS must be ≥ 0, got ${tol}`);
  const n = nx * nz;
  if (out && out.length !== n) throw new RangeError(`out must have nx·nz = ${n} values, got ${out.length}`);
  const times = out ?? new Float64Array(n);

  const s0 = interpolateNodes(slowness, grid, sourceX, sourceZ);
  const fixed = new Uint8Array(n);
  const cx = sourceX / h;
  const cz = sourceZ / h;
  const ix0 = Math.max(0, Math.floor(cx - radius));
  const ix1 = Math.min(nx - 1, Math.ceil(cx + radius));
  const iz0 = Math.max(0, Math.floor(cz - radius));
  const iz1 = Math.min(nz - 1, Math.ceil(cz + radius));

  if (scheme === "first-order") {
    times.fill(Infinity);
    for (let iz = iz0; iz <= iz1; iz++) {
      for (let ix = ix0; ix <= ix1; ix++) {
        const k = iz * nx + ix;
        times[k] = s0 * Math.hypot(ix * h - sourceX, iz * h - sourceZ);
        fixed[k] = 1;
      }
    }
    const rounds = sweepFirstOrder(times, fixed, slowness, nx, nz, h, maxRounds, tol);
    return { times, rounds };
  }

  // Factored: T = T0·tau. tau starts at +Inf except at the nodes within one cell of the source.
  const t0 = new Float64Array(n);
  const px = new Float64Array(n);
  const pz = new Float64Array(n);
  const tau = new Float64Array(n).fill(Infinity);
  for (let iz = 0; iz < nz; iz++) {
    for (let ix = 0; ix < nx; ix++) {
      const k = iz * nx + ix;
      const dx = ix * h - sourceX;
      const dz = iz * h - sourceZ;
      const r = Math.hypot(dx, dz);
      t0[k] = s0 * r;
      if (r > 1e-12 * h) {
        px[k] = (s0 * dx) / r;
        pz[k] = (s0 * dz) / r;
      }
    }
  }
  for (let iz = iz0; iz <= iz1; iz++) {
    for (let ix = ix0; ix <= ix1; ix++) {
      const k = iz * nx + ix;
      const dx = ix * h - sourceX;
      const dz = iz * h - sourceZ;
      if (Math.hypot(dx, dz) <= 1.0000001 * h) {
        // Straight ray with the slowness varying linearly from source to node (trapezoid rule):
        // exact for a homogeneous medium, second order in h for a smooth one.
        tau[k] = (s0 + slowness[k]) / (2 * s0);
        fixed[k] = 1;
      }
    }
  }
  const rounds = sweepFactored(tau, fixed, slowness, t0, px, pz, nx, nz, h, maxRounds, tol);
  for (let k = 0; k < n; k++) times[k] = t0[k] * tau[k];
  return { times, rounds };
}

/** The four sweep orderings of Zhao (2005): (x up, z up), (x down, z up), (x down, z down), (x up, z down). */
const ORDERS: ReadonlyArray<[boolean, boolean]> = [
  [true, true],
  [false, true],
  [false, false],
  [true, false],
];

function sweepFirstOrder(
  T: Float64Array,
  fixed: Uint8Array,
  slowness: ArrayLike<number>,
  nx: number,
  nz: number,
  h: number,
  maxRounds: number,
  tol: number,
): number {
  let round = 0;
  for (; round < maxRounds; round++) {
    let change = 0;
    for (const [xUp, zUp] of ORDERS) {
      for (let jz = 0; jz < nz; jz++) {
        const iz = zUp ? jz : nz - 1 - jz;
        for (let jx = 0; jx < nx; jx++) {
          const ix = xUp ? jx : nx - 1 - jx;
          const k = iz * nx + ix;
          if (fixed[k]) continue;
          const a = Math.min(ix > 0 ? T[k - 1] : Infinity, ix < nx - 1 ? T[k + 1] : Infinity);
          const b = Math.min(iz > 0 ? T[k - nx] : Infinity, iz < nz - 1 ? T[k + nx] : Infinity);
          if (a === Infinity && b === Infinity) continue;
          const f = slowness[k] * h;
          let t: number;
          if (Math.abs(a - b) >= f) t = Math.min(a, b) + f;
          else t = (a + b + Math.sqrt(2 * f * f - (a - b) * (a - b))) / 2;
          if (t < T[k]) {
            const d = T[k] === Infinity ? Infinity : T[k] - t;
            if (d > change) change = d;
            T[k] = t;
          }
        }
      }
    }
    if (change <= tol) return round + 1;
  }
  return round;
}

/**
 * Candidate tau at node k from an x neighbour (sx = ±1: neighbour at k − sx, tau value tx; NaN
 * for none) and a z neighbour (sz, tz; NaN for none). Returns NaN when the candidate is not causal.
 */
function factoredCandidate(s: number, T0: number, p: number, q: number, h: number, sx: number, tx: number, sz: number, tz: number): number {
  // One-sided derivative of tau towards the upwind neighbour: d tau = sx·(tau − tx)/h, so the
  // x component of grad T is tau·(p + sx·T0/h) − sx·T0·tx/h = ax·tau − bx.
  const useX = tx === tx;
  const useZ = tz === tz;
  // A direction without a neighbour drops out (Godunov: its upwind term is zero).
  const ax = useX ? p + (sx * T0) / h : 0;
  const bx = useX ? (sx * T0 * tx) / h : 0;
  const az = useZ ? q + (sz * T0) / h : 0;
  const bz = useZ ? (sz * T0 * tz) / h : 0;
  const A = ax * ax + az * az;
  const B = ax * bx + az * bz;
  const C = bx * bx + bz * bz - s * s;
  const disc = B * B - A * C;
  if (disc < 0 || A <= 0) return NaN;
  const t = (B + Math.sqrt(disc)) / A;
  // Causality: the gradient of T must point away from the neighbours used (Godunov upwinding).
  if (useX && sx * (ax * t - bx) < -1e-12 * s) return NaN;
  if (useZ && sz * (az * t - bz) < -1e-12 * s) return NaN;
  return t;
}

function sweepFactored(
  tau: Float64Array,
  fixed: Uint8Array,
  slowness: ArrayLike<number>,
  t0: Float64Array,
  px: Float64Array,
  pz: Float64Array,
  nx: number,
  nz: number,
  h: number,
  maxRounds: number,
  tol: number,
): number {
  let round = 0;
  for (; round < maxRounds; round++) {
    let change = 0;
    for (const [xUp, zUp] of ORDERS) {
      for (let jz = 0; jz < nz; jz++) {
        const iz = zUp ? jz : nz - 1 - jz;
        for (let jx = 0; jx < nx; jx++) {
          const ix = xUp ? jx : nx - 1 - jx;
          const k = iz * nx + ix;
          if (fixed[k]) continue;
          const s = slowness[k];
          const T0 = t0[k];
          const p = px[k];
          const q = pz[k];
          // Upwind neighbour per direction: the one with the earlier time T0·tau (as the plain
          // Godunov update takes min(T[i−1], T[i+1])); NaN where absent or not yet reached.
          let sx = 0;
          let tx = NaN;
          if (ix > 0 && tau[k - 1] !== Infinity) {
            sx = 1;
            tx = tau[k - 1];
          }
          if (ix < nx - 1 && tau[k + 1] !== Infinity && (sx === 0 || t0[k + 1] * tau[k + 1] < t0[k - 1] * tx)) {
            sx = -1;
            tx = tau[k + 1];
          }
          let sz = 0;
          let tz = NaN;
          if (iz > 0 && tau[k - nx] !== Infinity) {
            sz = 1;
            tz = tau[k - nx];
          }
          if (iz < nz - 1 && tau[k + nx] !== Infinity && (sz === 0 || t0[k + nx] * tau[k + nx] < t0[k - nx] * tz)) {
            sz = -1;
            tz = tau[k + nx];
          }
          if (sx === 0 && sz === 0) continue;
          // The two-sided update, then the one-sided ones; keep the smallest causal value.
          let best = Infinity;
          if (sx !== 0 && sz !== 0) {
            const c = factoredCandidate(s, T0, p, q, h, sx, tx, sz, tz);
            if (c === c) best = c;
          }
          if (sx !== 0) {
            const c = factoredCandidate(s, T0, p, q, h, sx, tx, 0, NaN);
            if (c === c && c < best) best = c;
          }
          if (sz !== 0) {
            const c = factoredCandidate(s, T0, p, q, h, 0, NaN, sz, tz);
            if (c === c && c < best) best = c;
          }
          if (best < tau[k]) {
            const d = tau[k] === Infinity ? Infinity : (tau[k] - best) * T0;
            if (d > change) change = d;
            tau[k] = best;
          }
        }
      }
    }
    if (change <= tol) return round + 1;
  }
  return round;
}
