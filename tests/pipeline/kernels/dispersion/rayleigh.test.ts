import { describe, expect, it } from "vitest";
import { halfSpaceRayleighSpeed, rayleighDispersion, rayleighSecular, type LayeredModel } from "../../../../pipeline/kernels/dispersion/rayleigh";

/**
 * Rayleigh speed from the cubic in q = c²/β² that the Rayleigh equation becomes after squaring
 * (Aki & Richards 2002, Quantitative Seismology, §5.2): q³ − 8q² + (24 − 16β²/α²)q − 16(1 − β²/α²) = 0,
 * the root in (0, 1). Solved here by its own bisection, independently of the kernel.
 */
function rayleighFromCubic(vp: number, vs: number): number {
  const g = (vs * vs) / (vp * vp);
  const p = (q: number) => q * q * q - 8 * q * q + (24 - 16 * g) * q - 16 * (1 - g);
  let lo = 0;
  let hi = 1;
  for (let i = 0; i < 200; i++) {
    const mid = 0.5 * (lo + hi);
    if (p(lo) * p(mid) <= 0) hi = mid;
    else lo = mid;
  }
  return vs * Math.sqrt(0.5 * (lo + hi));
}


type C = [number, number];
const csub = (a: C, b: C): C => [a[0] - b[0], a[1] - b[1]];
const cmul = (a: C, b: C): C => [a[0] * b[0] - a[1] * b[1], a[0] * b[1] + a[1] * b[0]];
const cdiv = (a: C, b: C): C => {
  const d = b[0] * b[0] + b[1] * b[1];
  return [(a[0] * b[0] + a[1] * b[1]) / d, (a[1] * b[0] - a[0] * b[1]) / d];
};
const cexp = (a: C): C => [Math.exp(a[0]) * Math.cos(a[1]), Math.exp(a[0]) * Math.sin(a[1])];
/** √(k² − ω²/v²): real when positive, i·√(ω²/v² − k²) otherwise. */
const vertical = (k: number, w: number, v: number): C => {
  const x = k * k - (w * w) / (v * v);
  return x >= 0 ? [Math.sqrt(x), 0] : [0, Math.sqrt(-x)];
};

/**
 * Boundary-condition determinant of one layer over a half-space written with displacement
 * potentials (Ewing, Jardetzky & Press 1957, Elastic Waves in Layered Media, ch. 4): in the layer
 * φ = A e^{−νz} + B e^{ν(z−H)}, ψ = C e^{−γz} + D e^{γ(z−H)}, in the half-space φ = E e^{−ν'(z−H)},
 * ψ = F e^{−γ'(z−H)}; u = ∇φ + ∇×(ψ ŷ); rows: τzz, τxz = 0 at z = 0 and continuity of ux, uz,
 * τzz, τxz at z = H. A 6 × 6 complex determinant by Gaussian elimination: a formulation
 * independent of the kernel's propagator, for checking its roots.
 */
function potentialDeterminant(layer: { h: number; vp: number; vs: number; rho: number }, half: { vp: number; vs: number; rho: number }, f: number, c: number): C {
  const w = 2 * Math.PI * f;
  const k = w / c;
  const ik: C = [0, k];
  // Column of one exponential term e^{s·(z − z0)} at depth z: [ux, uz, τzz, τxz].
  const pTerm = (s: C, e: C, lam: number, mu: number): C[] => {
    const s2 = cmul(s, s);
    return [cmul(ik, e), cmul(s, e), cmul([lam * (s2[0] - k * k) + 2 * mu * s2[0], (lam + 2 * mu) * s2[1]], e), cmul(cmul([2 * mu, 0], cmul(ik, s)), e)];
  };
  const sTerm = (s: C, e: C, mu: number): C[] => {
    const s2 = cmul(s, s);
    return [cmul([-s[0], -s[1]], e), cmul(ik, e), cmul(cmul([2 * mu, 0], cmul(ik, s)), e), cmul([-mu * (s2[0] + k * k), -mu * s2[1]], e)];
  };
  const mu1 = layer.rho * layer.vs ** 2;
  const lam1 = layer.rho * layer.vp ** 2 - 2 * mu1;
  const mu2 = half.rho * half.vs ** 2;
  const lam2 = half.rho * half.vp ** 2 - 2 * mu2;
  const nu = vertical(k, w, layer.vp);
  const ga = vertical(k, w, layer.vs);
  const nu2 = vertical(k, w, half.vp);
  const ga2 = vertical(k, w, half.vs);
  const H = layer.h;
  const one: C = [1, 0];
  const neg = (x: C): C => [-x[0], -x[1]];
  const eH = (s: C) => cexp([-s[0] * H, -s[1] * H]);
  // Layer columns at z = 0 and at z = H.
  const at0 = [pTerm(neg(nu), one, lam1, mu1), pTerm(nu, eH(nu), lam1, mu1), sTerm(neg(ga), one, mu1), sTerm(ga, eH(ga), mu1)];
  const atH = [pTerm(neg(nu), eH(nu), lam1, mu1), pTerm(nu, one, lam1, mu1), sTerm(neg(ga), eH(ga), mu1), sTerm(ga, one, mu1)];
  const halfCols = [pTerm(neg(nu2), one, lam2, mu2), sTerm(neg(ga2), one, mu2)];
  const M: C[][] = [];
  const scale = 1 / (mu2 * k * k);
  for (const row of [2, 3]) M.push([...at0.map((col) => cmul(col[row], [scale, 0])), [0, 0], [0, 0]]);
  for (const row of [0, 1, 2, 3]) {
    const sc = row < 2 ? 1 / k : scale;
    M.push([...atH.map((col) => cmul(col[row], [sc, 0])), ...halfCols.map((col) => cmul(col[row], [-sc, 0]))]);
  }
  let det: C = [1, 0];
  for (let i = 0; i < 6; i++) {
    let piv = i;
    for (let r = i + 1; r < 6; r++) if (Math.hypot(...M[r][i]) > Math.hypot(...M[piv][i])) piv = r;
    if (piv !== i) {
      [M[i], M[piv]] = [M[piv], M[i]];
      det = neg(det);
    }
    det = cmul(det, M[i][i]);
    for (let r = i + 1; r < 6; r++) {
      const factor = cdiv(M[r][i], M[i][i]);
      for (let j = i; j < 6; j++) M[r][j] = csub(M[r][j], cmul(factor, M[i][j]));
    }
  }
  return det;
}

describe("Rayleigh dispersion of layers over a half-space", () => {
  it("a homogeneous half-space is non-dispersive at the Rayleigh speed: 0.9194·Vs for a Poisson solid", () => {
    // Poisson solid (Vp = √3·Vs): c²/β² = 2 − 2/√3, c = 0.91940·Vs (Aki & Richards, closed form).
    const vs = 300;
    const exact = vs * Math.sqrt(2 - 2 / Math.sqrt(3));
    expect(exact / vs).toBeCloseTo(0.9194, 4);
    const hs: LayeredModel = { thicknessM: [0], vp: [vs * Math.sqrt(3)], vs: [vs], rho: [1900] };
    const c = rayleighDispersion(hs, [1, 10, 100, 1000]);
    // Root tolerance 1e-6 m/s; 1e-5 m/s leaves room for the scan bracket.
    for (const v of c) expect(Math.abs(v - exact)).toBeLessThan(1e-5);
    expect(Math.abs(halfSpaceRayleighSpeed(vs * Math.sqrt(3), vs) - exact)).toBeLessThan(1e-9);
  });

  it.each([0.1, 0.3, 0.45])("a half-space with Poisson's ratio %s matches the root of the Rayleigh cubic", (nu) => {
    const vs = 200;
    const vp = vs * Math.sqrt((2 - 2 * nu) / (1 - 2 * nu));
    const exact = rayleighFromCubic(vp, vs);
    const c = rayleighDispersion({ thicknessM: [0], vp: [vp], vs: [vs], rho: [1800] }, [5, 50]);
    for (const v of c) expect(Math.abs(v - exact) / exact).toBeLessThan(1e-8);
  });

  it("a layer of the half-space's own material changes nothing (the propagator through layers is exact)", () => {
    const m: LayeredModel = { thicknessM: [3, 4, 0], vp: [700, 700, 700], vs: [300, 300, 300], rho: [2000, 2000, 2000] };
    const exact = rayleighFromCubic(700, 300);
    const c = rayleighDispersion(m, [2, 20, 200, 2000]);
    for (const v of c) expect(Math.abs(v - exact) / exact).toBeLessThan(1e-8);
  });

  it("tends to the half-space's Rayleigh speed at low frequency and to the top layer's at high frequency, without loss of precision", () => {
    const m: LayeredModel = { thicknessM: [4, 0], vp: [350, 700], vs: [150, 300], rho: [1800, 2000] };
    const [low, lower, high, veryHigh] = rayleighDispersion(m, [0.2, 0.02, 400, 40000]);
    // The departure from the bottom's Rayleigh speed is of first order in k·d (a thin layer is a
    // small perturbation): about 0.2 % at 0.2 Hz (k·d ≈ 0.01), ten times less at 0.02 Hz. At 400 Hz the
    // wavelength (0.35 m) is a tenth of the layer: within 1e-6 of the top's. At 40 kHz k·d ≈ 7000, where
    // a plain Thomson–Haskell product overflows (e^{7000}); the orthonormalised propagation does not.
    const bottom = rayleighFromCubic(700, 300);
    expect(Math.abs(low / bottom - 1)).toBeLessThan(5e-3);
    expect(Math.abs(lower / bottom - 1)).toBeLessThan(5e-4);
    expect(Math.abs(lower / bottom - 1) / Math.abs(low / bottom - 1)).toBeCloseTo(0.1, 1);
    expect(Math.abs(high / rayleighFromCubic(350, 150) - 1)).toBeLessThan(1e-6);
    expect(Math.abs(veryHigh / rayleighFromCubic(350, 150) - 1)).toBeLessThan(1e-9);
  });

  it("finds higher modes above their cut-off, ordered by phase velocity and below the half-space Vs", () => {
    const m: LayeredModel = { thicknessM: [4, 0], vp: [350, 700], vs: [150, 300], rho: [1800, 2000] };
    const f = [5, 20, 40, 80];
    const c = rayleighDispersion(m, f, { modes: 3 });
    const at = (mode: number, i: number) => c[mode * f.length + i];
    // At 5 Hz only the fundamental mode is trapped (higher modes start where they reach Vs = 300 m/s).
    expect(Number.isFinite(at(0, 0))).toBe(true);
    expect(Number.isNaN(at(1, 0))).toBe(true);
    for (let i = 1; i < f.length; i++) {
      expect(at(1, i)).toBeGreaterThan(at(0, i));
      if (Number.isFinite(at(2, i))) expect(at(2, i)).toBeGreaterThan(at(1, i));
      expect(at(1, i)).toBeLessThan(300);
      // Every root is a zero of the secular function (sign change within ±1e-6 m/s).
      const s1 = rayleighSecular(m, f[i], at(1, i) - 1e-4);
      const s2 = rayleighSecular(m, f[i], at(1, i) + 1e-4);
      expect(s1 * s2).toBeLessThan(0);
    }
    // Phase velocities of every mode fall with frequency in this normally dispersive model.
    for (let mode = 0; mode < 2; mode++) {
      for (let i = 2; i < f.length; i++) expect(at(mode, i)).toBeLessThan(at(mode, i - 1));
    }
  });

  it("its roots for a layer over a half-space are simple zeros of the potential-method determinant (Ewing, Jardetzky & Press 1957)", () => {
    const layer = { h: 4, vp: 350, vs: 150, rho: 1800 };
    const half = { vp: 700, vs: 300, rho: 2000 };
    const f = [3, 8, 15, 25, 40, 70];
    const c = rayleighDispersion({ thicknessM: [layer.h, 0], vp: [layer.vp, half.vp], vs: [layer.vs, half.vs], rho: [layer.rho, half.rho] }, f, { modes: 3 });
    let checked = 0;
    for (let m = 0; m < 3; m++) {
      f.forEach((fq, i) => {
        const root = c[m * f.length + i];
        if (!Number.isFinite(root)) return;
        // Across a simple zero the determinant turns by 180°: D(c − δ)/D(c + δ) ≈ −1 for a small δ,
        // while ±2 % away it stays far from zero compared with its value at the root.
        const d = 1e-4;
        const ratio = cdiv(potentialDeterminant(layer, half, fq, root - d), potentialDeterminant(layer, half, fq, root + d));
        expect(ratio[0], `mode ${m}, ${fq} Hz`).toBeLessThan(-0.9);
        expect(Math.abs(ratio[1]), `mode ${m}, ${fq} Hz`).toBeLessThan(0.1);
        const atRoot = Math.hypot(...potentialDeterminant(layer, half, fq, root));
        const away = Math.hypot(...potentialDeterminant(layer, half, fq, root * 0.98));
        expect(atRoot / away).toBeLessThan(1e-3);
        checked++;
      });
    }
    expect(checked).toBeGreaterThanOrEqual(12);
  });

  it("refuses unphysical layers, naming the entry", () => {
    expect(() => rayleighDispersion({ thicknessM: [2, 0], vp: [250, 700], vs: [200, 300], rho: [1800, 2000] }, [10])).toThrow(/vp\[0\]/);
    expect(() => rayleighDispersion({ thicknessM: [0, 0], vp: [400, 700], vs: [200, 300], rho: [1800, 2000] }, [10])).toThrow(/thicknessM\[0\]/);
    expect(() => rayleighDispersion({ thicknessM: [0], vp: [700], vs: [300], rho: [2000] }, [0])).toThrow(/frequenciesHz\[0\]/);
  });
});
