/**
 * Rayleigh-wave phase velocities of elastic layers over an elastic half-space (P-SV, free
 * surface), fundamental mode and higher modes.
 *
 * Method: the displacement-stress vector (r1, r2, r3, r4) of Aki & Richards (2002, Quantitative
 * Seismology, eq. 7.28) obeys dr/dz = A·r in each homogeneous layer. The two solutions that decay
 * into the half-space are propagated upward to the surface and the secular function is the
 * determinant of their traction rows there (traction-free surface, r3 = r4 = 0). This is the
 * compound-matrix (delta-matrix) idea of Dunkin (1965, BSSA 55): only the 2 × 2 minors of the
 * two-column solution matter. Instead of Dunkin's closed-form 6 × 6 layer matrix, the loss of
 * precision of the Thomson–Haskell product at high frequency is avoided the way Gram–Schmidt
 * orthonormalisation methods do it (e.g. Wang 1999, BSSA 89, "A simple orthonormalization method
 * for stable and efficient computation of Green's functions"; reference from memory): each layer
 * is split into sublayers across which no solution
 * grows by more than e³, and after each sublayer the two columns are orthonormalised with a
 * positive-diagonal factor, which changes the minors by a positive factor only (their zeros and
 * signs stay, so bracketing of roots stays valid).
 *
 * The layer propagator exp(A·h) is evaluated in closed form from the eigenvalues ±ν, ±γ of A
 * (ν² = k² − ω²/α², γ² = k² − ω²/β²) by Sylvester's formula on A², which has the two eigenvalues
 * ν² and γ²: exp(Ah) = F(A²) + A·G(A²) with F(x) = cosh(√x·h), G(x) = sinh(√x·h)/√x, real for
 * either sign of x (cos and sin for x < 0), so layers faster or slower than c need no cases.
 *
 * Roots: for each frequency the secular function is scanned in c from below the slowest
 * Rayleigh speed of the layers up to the half-space S velocity, sign changes are bracketed and
 * refined by Brent's method (Brent 1973, Algorithms for Minimization without Derivatives, ch. 4);
 * mode n is the (n+1)-th root in increasing c (common practice: mode number by root order).
 *
 * Units: m, m/s, kg/m³, Hz. Layout of a model: parallel arrays, layer 0 at the top, the last
 * entry the half-space (its thickness ignored).
 */

/** Layers over a half-space: parallel arrays, the last entry is the half-space. */
export interface LayeredModel {
  /** Layer thicknesses, m (the last entry, the half-space's, is ignored). */
  thicknessM: ArrayLike<number>;
  /** P velocities, m/s. */
  vp: ArrayLike<number>;
  /** S velocities, m/s. */
  vs: ArrayLike<number>;
  /** Densities, kg/m³. */
  rho: ArrayLike<number>;
}

/** Checks a layered model; throws RangeError naming the bad entry. */
export function checkLayeredModel(m: LayeredModel): number {
  const n = m.vs.length;
  if (n < 1) throw new RangeError("model must have at least the half-space, got 0 layers");
  for (const [name, arr] of [["thicknessM", m.thicknessM], ["vp", m.vp], ["rho", m.rho]] as const) {
    if (arr.length !== n) throw new RangeError(`${name} has ${arr.length} entries, vs has ${n}`);
  }
  for (let i = 0; i < n; i++) {
    if (!(m.vs[i] > 0)) throw new RangeError(`vs[${i}] must be > 0, got ${m.vs[i]}`);
    if (!(m.vp[i] > Math.SQRT2 * m.vs[i])) throw new RangeError(`vp[${i}] must exceed √2·vs[${i}] (${Math.SQRT2 * m.vs[i]}), got ${m.vp[i]}`);
    if (!(m.rho[i] > 0)) throw new RangeError(`rho[${i}] must be > 0, got ${m.rho[i]}`);
    if (i < n - 1 && !(m.thicknessM[i] > 0)) throw new RangeError(`thicknessM[${i}] must be > 0, got ${m.thicknessM[i]}`);
  }
  return n;
}

/**
 * Rayleigh speed of a homogeneous half-space, m/s: the root in (0, β) of
 * (2 − c²/β²)² − 4·√(1 − c²/α²)·√(1 − c²/β²) = 0 (Rayleigh 1885; Aki & Richards eq. 5.58),
 * by bisection to full double precision.
 */
export function halfSpaceRayleighSpeed(vp: number, vs: number): number {
  if (!(vs > 0) || !(vp > Math.SQRT2 * vs)) throw new RangeError(`need vs > 0 and vp > √2·vs, got vp ${vp}, vs ${vs}`);
  const f = (c: number) => {
    const q = (c * c) / (vs * vs);
    return (2 - q) ** 2 - 4 * Math.sqrt(1 - (c * c) / (vp * vp)) * Math.sqrt(1 - q);
  };
  // f > 0 at c → β (value 1), f < 0 just above 0 (f ≈ −2q(1 − β²/α²) for small q).
  let lo = 1e-6 * vs;
  let hi = vs;
  for (let i = 0; i < 200 && hi - lo > 1e-13 * vs; i++) {
    const mid = 0.5 * (lo + hi);
    if (f(mid) < 0) lo = mid;
    else hi = mid;
  }
  return 0.5 * (lo + hi);
}

/** Work buffers of the secular function (allocated once per model evaluation). */
interface Work {
  a: Float64Array; // 16, A (scaled)
  a2: Float64Array; // 16, A²
  p: Float64Array; // 16, propagator of one sublayer (upward: exp(−A·h))
  v: Float64Array; // 8, two columns of 4
  t: Float64Array; // 8
}

function makeWork(): Work {
  return { a: new Float64Array(16), a2: new Float64Array(16), p: new Float64Array(16), v: new Float64Array(8), t: new Float64Array(8) };
}

/**
 * Fills `a` with the system matrix of Aki & Richards eq. 7.28 for one layer, scaled: the
 * tractions are divided by μ0·k and depths measured in 1/k, so all entries are of order one.
 * Returns ν²/k² and γ²/k².
 */
function fillSystem(a: Float64Array, vp: number, vs: number, rho: number, c: number, mu0: number): [number, number] {
  const mu = rho * vs * vs;
  const l2m = rho * vp * vp;
  const lam = l2m - 2 * mu;
  const zeta = (4 * mu * (lam + mu)) / l2m;
  // Unscaled (k = 1 after scaling depths by k; ω/k = c): rows of A·(r1, r2, r3, r4).
  // Tractions scaled by 1/μ0 (k = 1).
  a.fill(0);
  a[1] = 1; // r1' = k r2 + r3/μ
  a[2] = mu0 / mu;
  a[4] = -lam / l2m; // r2' = −kλ/(λ+2μ) r1 + r4/(λ+2μ)
  a[7] = mu0 / l2m;
  a[8] = (zeta - rho * c * c) / mu0; // r3' = (k²ζ − ρω²) r1 + kλ/(λ+2μ) r4
  a[11] = lam / l2m;
  a[13] = (-rho * c * c) / mu0; // r4' = −ρω² r2 − k r3
  a[14] = -1;
  return [1 - (c * c) / (vp * vp), 1 - (c * c) / (vs * vs)];
}

function mul4(x: Float64Array, y: Float64Array, out: Float64Array): void {
  for (let i = 0; i < 4; i++) {
    for (let j = 0; j < 4; j++) {
      let s = 0;
      for (let k = 0; k < 4; k++) s += x[i * 4 + k] * y[k * 4 + j];
      out[i * 4 + j] = s;
    }
  }
}

/** cosh(√x·h) and sinh(√x·h)/√x for real x of either sign. */
function coshSinh(x: number, h: number): [number, number] {
  if (x > 0) {
    const r = Math.sqrt(x);
    return [Math.cosh(r * h), Math.sinh(r * h) / r];
  }
  if (x < 0) {
    const r = Math.sqrt(-x);
    return [Math.cos(r * h), Math.sin(r * h) / r];
  }
  return [1, h];
}

/**
 * Propagator exp(s·A·h) (s = −1: upward across a sublayer of scaled thickness h) by Sylvester's
 * formula on A² with eigenvalues n2 = ν²/k², g2 = γ²/k² (distinct: n2 − g2 = c²(1/β² − 1/α²) > 0).
 */
function fillPropagator(w: Work, n2: number, g2: number, h: number, s: number): void {
  const { a, a2, p } = w;
  const [cn, sn] = coshSinh(n2, h);
  const [cg, sg] = coshSinh(g2, h);
  const d = n2 - g2;
  // F(A²) = [F(n2)(A² − g2 I) − F(g2)(A² − n2 I)]/(n2 − g2), same for G.
  const f1 = (cn - cg) / d;
  const f0 = (cg * n2 - cn * g2) / d;
  const g1 = (sn - sg) / d;
  const g0 = (sg * n2 - sn * g2) / d;
  mul4(a, a, a2);
  // A·G(A²) = g1·A³ + g0·A; A³ = A·A².
  for (let i = 0; i < 4; i++) {
    for (let j = 0; j < 4; j++) {
      let a3 = 0;
      for (let k = 0; k < 4; k++) a3 += a[i * 4 + k] * a2[k * 4 + j];
      const idx = i * 4 + j;
      p[idx] = f1 * a2[idx] + (i === j ? f0 : 0) + s * (g1 * a3 + g0 * a[idx]);
    }
  }
}

/** Gram–Schmidt on the two columns in w.v (v[0..3], v[4..7]) with positive diagonal factors. */
function orthonormalise(v: Float64Array): void {
  let n1 = 0;
  for (let i = 0; i < 4; i++) n1 += v[i] * v[i];
  n1 = Math.sqrt(n1);
  for (let i = 0; i < 4; i++) v[i] /= n1;
  let dot = 0;
  for (let i = 0; i < 4; i++) dot += v[i] * v[4 + i];
  for (let i = 0; i < 4; i++) v[4 + i] -= dot * v[i];
  let n2 = 0;
  for (let i = 0; i < 4; i++) n2 += v[4 + i] * v[4 + i];
  n2 = Math.sqrt(n2);
  for (let i = 0; i < 4; i++) v[4 + i] /= n2;
}

/**
 * Secular function of the layered model at phase velocity c (m/s) and frequency f (Hz): the
 * traction minor r3¹·r4² − r4¹·r3² of the two solutions decaying in the half-space, propagated to
 * the surface (up to a positive factor). Zero at the Rayleigh-mode phase velocities. Defined for
 * 0 < c < β of the half-space.
 */
export function rayleighSecular(m: LayeredModel, frequencyHz: number, c: number, work?: Work): number {
  const w = work ?? makeWork();
  const n = m.vs.length;
  const k = (2 * Math.PI * frequencyHz) / c;
  const mu0 = m.rho[n - 1] * m.vs[n - 1] * m.vs[n - 1];
  // Half-space: the solutions decaying downward (eigenvalues −ν, −γ) span the range of
  // Q = (A − νI)(A − γI), which annihilates the growing parts e^{+νz}, e^{+γz}.
  const [n2, g2] = fillSystem(w.a, m.vp[n - 1], m.vs[n - 1], m.rho[n - 1], c, mu0);
  const nu = Math.sqrt(n2);
  const ga = Math.sqrt(g2);
  const { a, a2, v, t } = w;
  mul4(a, a, a2);
  // Q = A² − (ν+γ)A + νγ I; its columns 3 and 4 (unit tractions) as the starting pair. Not the
  // columns of unit displacements: their traction minor carries, besides the Rayleigh function,
  // a second factor that vanishes at the same c (the growing solutions' traction determinant),
  // which makes a double root without a sign change. The factor the traction columns carry is
  // the growing solutions' displacement determinant, ∝ k² − νγ > 0 for every c > 0.
  for (let i = 0; i < 4; i++) {
    for (let col = 0; col < 2; col++) {
      const idx = i * 4 + col + 2;
      v[col * 4 + i] = a2[idx] - (nu + ga) * a[idx] + (i === col + 2 ? nu * ga : 0);
    }
  }
  orthonormalise(v);
  for (let L = n - 2; L >= 0; L--) {
    const [ln2, lg2] = fillSystem(w.a, m.vp[L], m.vs[L], m.rho[L], c, mu0);
    const grow = Math.sqrt(Math.max(ln2, lg2, 0));
    const hTotal = k * m.thicknessM[L];
    const parts = Math.max(1, Math.ceil((grow * hTotal) / 3));
    fillPropagator(w, ln2, lg2, hTotal / parts, -1);
    for (let s = 0; s < parts; s++) {
      for (let col = 0; col < 2; col++) {
        for (let i = 0; i < 4; i++) {
          let acc = 0;
          for (let j = 0; j < 4; j++) acc += w.p[i * 4 + j] * v[col * 4 + j];
          t[col * 4 + i] = acc;
        }
      }
      v.set(t);
      orthonormalise(v);
    }
  }
  return v[2] * v[7] - v[3] * v[6];
}

/** Brent's root finder on [a, b] with f(a)·f(b) < 0 (Brent 1973, ch. 4). */
export function brentRoot(f: (x: number) => number, a: number, b: number, fa: number, fb: number, tol: number): number {
  let c = a;
  let fc = fa;
  let d = b - a;
  let e = d;
  for (let iter = 0; iter < 200; iter++) {
    if (fb * fc > 0) {
      c = a;
      fc = fa;
      d = b - a;
      e = d;
    }
    if (Math.abs(fc) < Math.abs(fb)) {
      a = b;
      b = c;
      c = a;
      fa = fb;
      fb = fc;
      fc = fa;
    }
    const tol1 = 2 * Number.EPSILON * Math.abs(b) + 0.5 * tol;
    const xm = 0.5 * (c - b);
    if (Math.abs(xm) <= tol1 || fb === 0) return b;
    if (Math.abs(e) >= tol1 && Math.abs(fa) > Math.abs(fb)) {
      const s = fb / fa;
      let p: number;
      let q: number;
      if (a === c) {
        p = 2 * xm * s;
        q = 1 - s;
      } else {
        const qq = fa / fc;
        const r = fb / fc;
        p = s * (2 * xm * qq * (qq - r) - (b - a) * (r - 1));
        q = (qq - 1) * (r - 1) * (s - 1);
      }
      if (p > 0) q = -q;
      p = Math.abs(p);
      if (2 * p < Math.min(3 * xm * q - Math.abs(tol1 * q), Math.abs(e * q))) {
        e = d;
        d = p / q;
      } else {
        d = xm;
        e = d;
      }
    } else {
      d = xm;
      e = d;
    }
    a = b;
    fa = fb;
    b += Math.abs(d) > tol1 ? d : xm > 0 ? tol1 : -tol1;
    fb = f(b);
  }
  return b;
}

/** Options of {@link rayleighDispersion}. */
export interface RayleighOptions {
  /** Modes to compute, 0 = fundamental. Default 1 (fundamental only). */
  modes?: number;
  /** Relative step of the scan in c for bracketing roots. Default 0.002 (0.2 % of c). */
  scanStep?: number;
  /** Root tolerance, m/s. Default 1e-6. */
  toleranceMps?: number;
}

/**
 * Rayleigh phase velocities, m/s, flat `[mode][frequency]` (modes × frequencies), NaN where a
 * mode does not exist below the half-space S velocity (below its cut-off frequency).
 */
export function rayleighDispersion(m: LayeredModel, frequenciesHz: ArrayLike<number>, options: RayleighOptions = {}): Float64Array {
  const n = checkLayeredModel(m);
  const modes = options.modes ?? 1;
  const step = options.scanStep ?? 0.002;
  const tol = options.toleranceMps ?? 1e-6;
  if (!Number.isInteger(modes) || modes < 1) throw new RangeError(`modes must be an integer ≥ 1, got ${modes}`);
  if (!(step > 0 && step < 0.1)) throw new RangeError(`scanStep must be in (0, 0.1), got ${step}`);
  const nf = frequenciesHz.length;
  const out = new Float64Array(modes * nf).fill(NaN);
  const work = makeWork();
  // Lowest possible phase velocity: below the slowest Rayleigh speed of any layer (common
  // practice: the fundamental mode lies between the slowest layer Rayleigh speed and β of the
  // half-space); 0.98 of it leaves room for rounding.
  let cMin = Infinity;
  for (let i = 0; i < n; i++) cMin = Math.min(cMin, halfSpaceRayleighSpeed(m.vp[i], m.vs[i]));
  cMin *= 0.98;
  const cMax = m.vs[n - 1] * (1 - 1e-9);
  for (let q = 0; q < nf; q++) {
    const f = frequenciesHz[q];
    if (!(f > 0)) throw new RangeError(`frequenciesHz[${q}] must be > 0, got ${f}`);
    const sec = (c: number) => rayleighSecular(m, f, c, work);
    let found = 0;
    let cLo = cMin;
    let fLo = sec(cLo);
    while (found < modes && cLo < cMax) {
      const cHi = Math.min(cMax, cLo * (1 + step));
      const fHi = sec(cHi);
      if (fLo === 0) {
        out[found * nf + q] = cLo;
        found++;
      } else if (fLo * fHi < 0) {
        out[found * nf + q] = brentRoot(sec, cLo, cHi, fLo, fHi, tol);
        found++;
      }
      cLo = cHi;
      fLo = fHi;
    }
  }
  return out;
}
