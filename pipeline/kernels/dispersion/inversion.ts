/**
 * Inversion of a picked fundamental-mode Rayleigh dispersion curve for a layered S-velocity
 * profile by damped least squares (Levenberg 1944; Marquardt 1963, J. SIAM 11: the step solves
 * (JᵀJ + λ·diag(JᵀJ))·Δ = −Jᵀr, λ shrinks after an accepted step and grows after a rejected one)
 * with a forward-difference Jacobian. Unknowns: log Vs of each layer and of the half-space, and,
 * when asked, log thickness of each layer (logarithms keep them positive), optionally damped
 * towards the starting model (Tikhonov-style rows added to the residuals). Vp follows Vs by a
 * Poisson's ratio ν: Vp = Vs·√((2 − 2ν)/(1 − 2ν)) (from λ = 2μν/(1 − 2ν), any elasticity text);
 * density by a stated rule: a constant, or Gardner's rule ρ = 310·Vp^0.25 kg/m³ with Vp in m/s
 * (Gardner, Gardner & Gregory 1974, Geophysics 39, in SI units).
 *
 * The depth of investigation is reported as a fraction (default ½) of the longest wavelength
 * picked: common practice says the curve constrains Vs down to about a third to a half of it.
 *
 * Units: Hz, m/s, m, kg/m³.
 */
import { rayleighDispersion, type LayeredModel } from "./rayleigh";

/** Density rule of the inversion. */
export type DensityRule = { rule: "constant"; kgPerM3: number } | { rule: "gardner" };

/** Settings of {@link invertDispersionCurve}. */
export interface CurveInversionOptions {
  /** Starting thickness of each layer above the half-space, m (its length is the layer count). */
  thicknessM: number[];
  /** Starting Vs of each layer and of the half-space (length thicknessM.length + 1), m/s; from the curve when absent. */
  startVsMps?: number[];
  /** Invert for the thicknesses too (else they stay as given). */
  freeThickness: boolean;
  /** Poisson's ratio ν for Vp from Vs, in (0, 0.5). */
  poissonRatio: number;
  density: DensityRule;
  /** Bounds of Vs, m/s. */
  minVsMps: number;
  maxVsMps: number;
  /** Largest number of accepted or rejected steps. */
  maxIterations: number;
  /** Fraction of the longest picked wavelength reported as the depth of investigation. */
  investigationFraction: number;
  /**
   * Damping towards the starting model, m/s per unit of log parameter: the objective adds
   * (dampingMps·(m − m₀))² per parameter, so a 10 % change costs as much as a residual of
   * 0.1·dampingMps on one pick. Parameters the curve does not constrain (deep layers) stay near
   * the start instead of running to a bound. Default 0 (none).
   */
  dampingMps?: number;
}

/** Result of {@link invertDispersionCurve}. */
export interface CurveInversionResult {
  model: { thicknessM: Float64Array; vp: Float64Array; vs: Float64Array; rho: Float64Array };
  /** Modelled phase velocities at the picked frequencies, m/s (NaN where the mode does not exist). */
  modelledMps: Float64Array;
  /** Root-mean-square of modelled − picked, m/s. */
  rmsMisfitMps: number;
  /** rms misfit after each accepted step, starting with the starting model, m/s. */
  misfitHistoryMps: number[];
  iterations: number;
  /** True when the last steps changed the misfit by less than 1e-4 relative. */
  converged: boolean;
  /** Longest wavelength picked, m. */
  longestWavelengthM: number;
  /** investigationFraction × longest wavelength, m. */
  depthOfInvestigationM: number;
}

/** Vp from Vs by Poisson's ratio ν: Vp/Vs = √((2 − 2ν)/(1 − 2ν)). */
export function vpFromPoisson(vs: number, nu: number): number {
  if (!(nu > 0 && nu < 0.5)) throw new RangeError(`poissonRatio must lie in (0, 0.5), got ${nu}`);
  return vs * Math.sqrt((2 - 2 * nu) / (1 - 2 * nu));
}

/** Density by the rule, kg/m³. */
export function densityFromRule(vp: number, rule: DensityRule): number {
  if (rule.rule === "constant") return rule.kgPerM3;
  // Gardner et al. (1974): ρ[g/cm³] = 0.31·Vp[m/s]^0.25 → ρ[kg/m³] = 310·Vp^0.25.
  return 310 * Math.pow(vp, 0.25);
}

/** A layered model from Vs and thicknesses by the Vp and density rules. */
export function layeredFromVs(vs: ArrayLike<number>, thicknessM: ArrayLike<number>, nu: number, rule: DensityRule): LayeredModel & {
  thicknessM: Float64Array; vp: Float64Array; vs: Float64Array; rho: Float64Array;
} {
  const n = vs.length;
  const th = new Float64Array(n);
  for (let i = 0; i < n - 1; i++) th[i] = thicknessM[i];
  const vsOut = Float64Array.from(vs);
  const vp = vsOut.map((v) => vpFromPoisson(v, nu));
  const rho = vp.map((v) => densityFromRule(v, rule));
  return { thicknessM: th, vp, vs: vsOut, rho };
}

/**
 * A starting Vs per layer from the picked curve (common practice: Vs ≈ c/0.92 at the wavelength
 * about twice the depth, the "half-wavelength" reading), the half-space above every pick.
 */
export function startingVs(frequenciesHz: ArrayLike<number>, velocitiesMps: ArrayLike<number>, thicknessM: number[]): number[] {
  const n = thicknessM.length;
  const lambdas: Array<[number, number]> = [];
  let cMax = 0;
  for (let i = 0; i < frequenciesHz.length; i++) {
    lambdas.push([velocitiesMps[i] / frequenciesHz[i], velocitiesMps[i]]);
    cMax = Math.max(cMax, velocitiesMps[i]);
  }
  lambdas.sort((a, b) => a[0] - b[0]);
  const cAt = (lambda: number) => {
    if (lambda <= lambdas[0][0]) return lambdas[0][1];
    for (let i = 1; i < lambdas.length; i++) {
      if (lambda <= lambdas[i][0]) {
        const [l0, c0] = lambdas[i - 1];
        const [l1, c1] = lambdas[i];
        return c0 + ((c1 - c0) * (lambda - l0)) / (l1 - l0 || 1);
      }
    }
    return lambdas[lambdas.length - 1][1];
  };
  const out: number[] = [];
  let top = 0;
  for (let i = 0; i < n; i++) {
    const mid = top + 0.5 * thicknessM[i];
    out.push(cAt(2 * mid) / 0.92);
    top += thicknessM[i];
  }
  out.push(Math.max(cMax / 0.9, cAt(2 * top) / 0.92));
  return out;
}

/** Inverts one picked curve (frequencies and phase velocities of the picks, NaN picks left out). */
export function invertDispersionCurve(frequenciesHz: ArrayLike<number>, velocitiesMps: ArrayLike<number>, o: CurveInversionOptions): CurveInversionResult {
  if (frequenciesHz.length !== velocitiesMps.length) throw new RangeError(`frequenciesHz has ${frequenciesHz.length} entries, velocitiesMps ${velocitiesMps.length}`);
  const f: number[] = [];
  const c: number[] = [];
  for (let i = 0; i < frequenciesHz.length; i++) {
    if (Number.isFinite(velocitiesMps[i]) && frequenciesHz[i] > 0) {
      f.push(frequenciesHz[i]);
      c.push(velocitiesMps[i]);
    }
  }
  const nLayers = o.thicknessM.length;
  if (f.length < 2) throw new RangeError(`need at least 2 picks, got ${f.length}`);
  if (nLayers < 1) throw new RangeError("thicknessM must give at least one layer above the half-space");
  o.thicknessM.forEach((h, i) => {
    if (!(h > 0)) throw new RangeError(`thicknessM[${i}] must be > 0, got ${h}`);
  });
  if (!(o.maxVsMps > o.minVsMps && o.minVsMps > 0)) throw new RangeError(`need 0 < minVsMps < maxVsMps, got ${o.minVsMps}, ${o.maxVsMps}`);
  if (!(o.investigationFraction > 0 && o.investigationFraction <= 1)) throw new RangeError(`investigationFraction must lie in (0, 1], got ${o.investigationFraction}`);
  vpFromPoisson(1, o.poissonRatio);
  const start = o.startVsMps ?? startingVs(f, c, o.thicknessM);
  if (start.length !== nLayers + 1) throw new RangeError(`startVsMps needs ${nLayers + 1} entries, got ${start.length}`);

  const nVs = nLayers + 1;
  const nParams = nVs + (o.freeThickness ? nLayers : 0);
  const clampLog = (x: number) => Math.min(Math.log(o.maxVsMps), Math.max(Math.log(o.minVsMps), x));
  const m0 = new Float64Array(nParams);
  for (let i = 0; i < nVs; i++) m0[i] = clampLog(Math.log(start[i]));
  if (o.freeThickness) for (let i = 0; i < nLayers; i++) m0[nVs + i] = Math.log(o.thicknessM[i]);
  const minLogH = Math.log(0.1);

  const toModel = (m: Float64Array) => {
    const vs = new Float64Array(nVs);
    for (let i = 0; i < nVs; i++) vs[i] = Math.exp(m[i]);
    const th = o.thicknessM.map((h, i) => (o.freeThickness ? Math.exp(m[nVs + i]) : h));
    return layeredFromVs(vs, th, o.poissonRatio, o.density);
  };
  const forward = (m: Float64Array): Float64Array => {
    const model = toModel(m);
    return rayleighDispersion(model, f, { scanStep: 0.003 });
  };
  const residuals = (m: Float64Array, out: Float64Array): number => {
    const mod = forward(m);
    const hsVs = Math.exp(m[nVs - 1]);
    let s = 0;
    for (let i = 0; i < f.length; i++) {
      // No root below the half-space Vs: the mode is not trapped; count it at that bound.
      const v = Number.isFinite(mod[i]) ? mod[i] : hsVs;
      out[i] = v - c[i];
      s += out[i] * out[i];
    }
    return s;
  };

  const nd = f.length;
  const damping = o.dampingMps ?? 0;
  if (!(damping >= 0)) throw new RangeError(`dampingMps must be ≥ 0, got ${damping}`);
  // Objective: data residuals plus damping rows dampingMps·(m − m₀); `phi` is the whole objective,
  // `dataPhi` its data part (reported as the rms misfit).
  const dampingTerm = (m: Float64Array) => {
    let s = 0;
    for (let q = 0; q < nParams; q++) s += (damping * (m[q] - m0[q])) ** 2;
    return s;
  };
  let m = m0;
  let r = new Float64Array(nd);
  let dataPhi = residuals(m, r);
  let phi = dataPhi + dampingTerm(m);
  const history = [Math.sqrt(dataPhi / nd)];
  let lambda = 1e-2;
  const J = new Float64Array(nd * nParams);
  const rTry = new Float64Array(nd);
  let converged = false;
  let iterations = 0;
  const eps = 1e-3;
  const project = (x: Float64Array) => {
    for (let i = 0; i < nVs; i++) x[i] = clampLog(x[i]);
    if (o.freeThickness) for (let i = 0; i < nLayers; i++) x[nVs + i] = Math.max(minLogH, x[nVs + i]);
  };
  outer: while (iterations < o.maxIterations) {
    // Forward-difference Jacobian in the log parameters.
    for (let p = 0; p < nParams; p++) {
      const mp = Float64Array.from(m);
      mp[p] += eps;
      residuals(mp, rTry);
      for (let i = 0; i < nd; i++) J[i * nParams + p] = (rTry[i] - r[i]) / eps;
    }
    const JtJ = new Float64Array(nParams * nParams);
    const Jtr = new Float64Array(nParams);
    for (let a = 0; a < nParams; a++) {
      for (let i = 0; i < nd; i++) Jtr[a] += J[i * nParams + a] * r[i];
      Jtr[a] += damping * damping * (m[a] - m0[a]);
      for (let b = 0; b < nParams; b++) {
        let s = 0;
        for (let i = 0; i < nd; i++) s += J[i * nParams + a] * J[i * nParams + b];
        JtJ[a * nParams + b] = s + (a === b ? damping * damping : 0);
      }
    }
    for (;;) {
      iterations++;
      const A = Float64Array.from(JtJ);
      let diagMax = 0;
      for (let a = 0; a < nParams; a++) diagMax = Math.max(diagMax, JtJ[a * nParams + a]);
      for (let a = 0; a < nParams; a++) A[a * nParams + a] += lambda * Math.max(JtJ[a * nParams + a], 1e-9 * diagMax + 1e-12);
      const step = solveSymmetric(A, Jtr.map((x) => -x), nParams);
      const mTry = Float64Array.from(m);
      for (let p = 0; p < nParams; p++) mTry[p] += step[p];
      project(mTry);
      const dataTry = residuals(mTry, rTry);
      const phiTry = dataTry + dampingTerm(mTry);
      if (phiTry < phi) {
        const rel = (phi - phiTry) / phi;
        m = mTry;
        r = Float64Array.from(rTry);
        phi = phiTry;
        dataPhi = dataTry;
        history.push(Math.sqrt(dataPhi / nd));
        lambda = Math.max(lambda / 3, 1e-7);
        if (rel < 1e-4 || Math.sqrt(phi / nd) < 1e-3) {
          converged = true;
          break outer;
        }
        break;
      }
      lambda *= 5;
      if (lambda > 1e8) {
        converged = true;
        break outer;
      }
      if (iterations >= o.maxIterations) break outer;
    }
  }

  const model = toModel(m);
  const modelledMps = rayleighDispersion(model, f, { scanStep: 0.003 });
  let longest = 0;
  for (let i = 0; i < nd; i++) longest = Math.max(longest, c[i] / f[i]);
  return {
    model,
    modelledMps,
    rmsMisfitMps: Math.sqrt(dataPhi / nd),
    misfitHistoryMps: history,
    iterations,
    converged,
    longestWavelengthM: longest,
    depthOfInvestigationM: o.investigationFraction * longest,
  };
}

/** Solves the symmetric positive-definite system A·x = b (n × n, row-major) by Cholesky. */
export function solveSymmetric(A: Float64Array, b: Float64Array, n: number): Float64Array {
  const L = new Float64Array(n * n);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j <= i; j++) {
      let s = A[i * n + j];
      for (let k = 0; k < j; k++) s -= L[i * n + k] * L[j * n + k];
      if (i === j) {
        if (!(s > 0)) throw new RangeError(`matrix is not positive definite at row ${i}`);
        L[i * n + i] = Math.sqrt(s);
      } else {
        L[i * n + j] = s / L[j * n + j];
      }
    }
  }
  const y = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    let s = b[i];
    for (let k = 0; k < i; k++) s -= L[i * n + k] * y[k];
    y[i] = s / L[i * n + i];
  }
  const x = new Float64Array(n);
  for (let i = n - 1; i >= 0; i--) {
    let s = y[i];
    for (let k = i + 1; k < n; k++) s -= L[k * n + i] * x[k];
    x[i] = s / L[i * n + i];
  }
  return x;
}
