/**
 * Per-shot misfit and gradient of full-waveform inversion by the adjoint-state method for the 2D
 * elastic velocity-stress solver (pipeline/kernels/fd/), P-SV and SH, as one pure function with
 * plain serialisable input and output (typed arrays), so it runs unchanged in a worker or on
 * another machine.
 *
 * Method (Tarantola 1986, Geophysics 51; Mora 1987, Geophysics 52; review: Plessix 2006, GJI 167;
 * velocity-stress staggered form: Köhn 2011, PhD thesis, Kiel; Fichtner 2011, Full Seismic Waveform
 * Modelling and Inversion), written for the discrete scheme itself, so the gradient is that of the
 * misfit of the solver's traces:
 *
 * One solver step n is v_n = v_{n−1} + s·f_n + B·D σ_{n−1} (B the buoyancy coefficients dt/(ρh),
 * D the 4th-order staggered divergence) followed by σ_n = σ_{n−1} + C·E v_n (C the stiffness
 * coefficients scaled by dt/h, E the staggered strain rate); traces are the resampled read-out
 * R·P·v_n. With Lagrange multipliers a_n, b_n for the two updates, J's stationarity gives
 * a backward recursion. In the interior of the grid E = −Dᵀ exactly (the staggered differences
 * are each other's negative transposes), and on the free-surface row they are so in an inner
 * product that weighs the nodes on the surface (vx and σxx in P-SV, vy and σxy in SH) by ½
 * (half cells). With p = B·W⁻¹·a and q = −C·W⁻¹·b the backward recursion is the solver's own step
 * run from the last step to the first, with p the velocities and q the stresses, fed at the
 * receivers with B·W⁻¹·Pᵀ·Rᵀ·∂J/∂d (the transpose of read-out and resampling of the adjoint
 * source ∂J/∂d from misfitAndAdjoint). So the adjoint solve uses the same WebAssembly kernel,
 * with two terms per surface column taken out around each step (where a stress image above the
 * free surface meets the c2 = −1/24 coefficient; see `surfaceCorrectionPsv`). What is not exactly
 * transposed: the memory terms of the absorbing strips (waves there leave the model).
 *
 * Gradients with respect to the solver's coefficients (sums over the steps n):
 *   ∂J/∂B_k = W_k/B_k² · Σ_n v_n[k]·(p_n − p_{n+1})[k]     (summation by parts of Σ a_n·Δv_n/B)
 *   ∂J/∂C   = Σ_n b_n ⊗ (E v_n),  b_n = −W·C⁻¹ q_n        (per stress point; 2×2 block for σxx, σzz)
 * then to the cells through the staggered averages (arithmetic ρ on velocity points, harmonic μ on
 * shear-stress points, the surface modulus M − λ²/M on the free-surface row) and to Vp, Vs, ρ by
 * the chain rule with λ = ρ(Vp² − 2Vs²), μ = ρVs² (../shared/FIELD.md, checked):
 *   ∂J/∂Vp = 2ρVp ∂J/∂λ;  ∂J/∂Vs = 2ρVs (∂J/∂μ − 2 ∂J/∂λ);  ∂J/∂ρ|Vp,Vs = ∂J/∂ρ + (Vp² − 2Vs²) ∂J/∂λ + Vs² ∂J/∂μ.
 *
 * The forward wavefield is kept on the model cells only (not the absorbing strips), every K-th
 * step with K·dt at most half the period of the highest frequency the wavelet carries (its
 * spectrum above 1e-3 of the peak): the zero-lag correlation of band-limited fields is then
 * exact as a sum over the kept steps times K (Parseval for band-limited sampled signals). Kept per
 * step: the velocities and the strain rates E v (P-SV 5 fields, SH 3), float32.
 */
import type { ElasticModel } from "../../types";
import { misfitAndAdjoint, type InversionMeasure } from "../misfit-adjoint";
import { FD_C1, FD_C2 } from "../fd/reference-kernel";
import {
  prepareSimulation,
  receiverStencil,
  resampleRecords,
  resampleRecordsTranspose,
  runShotSteps,
  sourceInjection,
  sourceTimeFunction,
  throwIfCancelled,
  type FdSetup,
  type ReceiverStencil,
  type ShotPositions,
  type SimulationOptions,
  type SourceKind,
  type VelocityComponent,
} from "../fd/simulation";
import type { WaveMode } from "../fd/layout";
import { waveletBand, type SourceWavelet } from "../fd/wavelet";

/** Input of {@link shotGradient}. Units SI; blocks flat `[receiver][sample]`. */
export interface ShotGradientInput {
  model: ElasticModel;
  shot: ShotPositions;
  simulation: {
    mode: WaveMode;
    sourceKind: SourceKind;
    component: VelocityComponent;
    wavelet: SourceWavelet;
    pmlCells?: number;
    freeSurface?: boolean;
    dtS?: number;
    minPointsPerWavelength?: number;
  };
  output: { intervalS: number; count: number; startTimeS: number };
  /** Observed traces `[receiver][sample]` at the output sampling. */
  observed: Float32Array;
  /** Per-receiver weight; 0 leaves a trace out. */
  traceWeights?: Float32Array;
  /** Samples [firstSample, endSample) enter the misfit. */
  window?: { firstSample: number; endSample: number };
  measure: InversionMeasure;
  /** False: misfit and synthetics only (one forward solve, for line searches). */
  wantGradient: boolean;
  /** Shared flag; non-zero stops the solves with an AbortError (checked every 64 steps). */
  cancelFlag?: Int32Array;
}

/** Output of {@link shotGradient}. */
export interface ShotGradientOutput {
  misfit: number;
  traceMisfits: Float64Array;
  /** Synthetic traces `[receiver][sample]`, equal to simulateShot's for the same settings. */
  synthetic: Float32Array;
  /** ∂J/∂Vp (zero in SH), ∂J/∂Vs, ∂J/∂ρ (at fixed Vp, Vs) per model cell `[z][x]`, per m/s and per kg/m³. */
  gradient?: { vp: Float32Array; vs: Float32Array; rho: Float32Array };
  /** Per model cell: Σ_t (forward particle velocity)²·dt, m²/s, for a pseudo-Hessian (Shin et al. 2001). */
  illumination?: Float32Array;
  forwardSolves: number;
  adjointSolves: number;
  /** Bytes of forward wavefield kept for the correlation. */
  storedWavefieldBytes: number;
}

const f32 = Math.fround;

/** Fraction of the wavelet's peak amplitude spectrum above which it counts as carried. */
const BAND_FLOOR = 1e-3;

/** Steps between kept forward wavefields: K·dt ≤ 1/(2·fmax) (Nyquist of the wavelet's band). */
export function keepEverySteps(wavelet: SourceWavelet, dtS: number): number {
  const fmax = waveletBand(wavelet, BAND_FLOOR).maxHz;
  if (!(fmax > 0)) return 1;
  return Math.max(1, Math.floor(1 / (2 * fmax * dtS)));
}

function simulationOptions(input: ShotGradientInput): SimulationOptions {
  const s = input.simulation;
  return {
    mode: s.mode, sourceKind: s.sourceKind, component: s.component, wavelet: s.wavelet, pmlCells: s.pmlCells,
    freeSurface: s.freeSurface, dtS: s.dtS, minPointsPerWavelength: s.minPointsPerWavelength, output: input.output,
    cancelFlag: input.cancelFlag,
  };
}

function checkInput(input: ShotGradientInput): void {
  const nrec = input.shot.receiverX.length;
  const n = nrec * input.output.count;
  if (input.observed.length !== n) throw new RangeError(`observed must hold ${nrec} × ${input.output.count} = ${n} samples, got ${input.observed.length}`);
  if (input.traceWeights && input.traceWeights.length !== nrec) {
    throw new RangeError(`traceWeights must hold ${nrec} values, got ${input.traceWeights.length}`);
  }
}

/** Zeroes the fields and the absorbing memory of a kernel buffer (coefficients stay). */
function clearWavefield(setup: FdSetup): void {
  const { layout, mem } = setup;
  const o = layout.offsets;
  mem.fill(0, o.f0, o.m0);
  const psi = [o.px0, o.px1, o.px2, o.px3, o.pz0, o.pz1, o.pz2, o.pz3].filter((x) => x > 0);
  if (psi.length > 0) mem.fill(0, Math.min(...psi), layout.totalBytes / 4);
}

/**
 * Where the model cells sit in the kernel buffer: cell (mz, mx) of the model is at buffer offset
 * `first + mz·rowFloats + mx` inside each grid array.
 */
interface CellGrid {
  nx: number;
  nz: number;
  first: number;
  rowFloats: number;
}

function cellGrid(setup: FdSetup): CellGrid {
  const L = setup.layout;
  return { nx: setup.model.nx, nz: setup.model.nz, first: L.org + L.rowOffset * L.rowFloats + L.colOffset, rowFloats: L.rowFloats };
}

/** Copies one grid array on the model cells into `out[at …]`, `[z][x]`. */
function copyCells(mem: Float32Array, field: number, g: CellGrid, out: Float32Array, at: number): void {
  for (let mz = 0; mz < g.nz; mz++) {
    const from = field + g.first + mz * g.rowFloats;
    for (let mx = 0; mx < g.nx; mx++) out[at + mz * g.nx + mx] = mem[from + mx];
  }
}

/**
 * P-SV strain rates as the kernel forms them, on the model cells: ∂vx/∂x and ∂vz/∂z at σxx, σzz
 * (i, j), ∂vx/∂z + ∂vz/∂x at σxz (i+½, j+½); into `out` at `at`, `at + cells`, `at + 2·cells`.
 */
function strainRatesPsv(mem: Float32Array, vx: number, vz: number, g: CellGrid, out: Float32Array, at: number): void {
  const r = g.rowFloats;
  const cells = g.nx * g.nz;
  for (let mz = 0; mz < g.nz; mz++) {
    for (let mx = 0; mx < g.nx; mx++) {
      const c = g.first + mz * r + mx;
      const k = at + mz * g.nx + mx;
      out[k] = FD_C1 * (mem[vx + c] - mem[vx + c - 1]) + FD_C2 * (mem[vx + c + 1] - mem[vx + c - 2]);
      out[k + cells] = FD_C1 * (mem[vz + c] - mem[vz + c - r]) + FD_C2 * (mem[vz + c + r] - mem[vz + c - 2 * r]);
      out[k + 2 * cells] =
        FD_C1 * (mem[vx + c + r] - mem[vx + c]) + FD_C2 * (mem[vx + c + 2 * r] - mem[vx + c - r]) +
        FD_C1 * (mem[vz + c + 1] - mem[vz + c]) + FD_C2 * (mem[vz + c + 2] - mem[vz + c - 1]);
    }
  }
}

/** SH strain rates on the model cells: ∂vy/∂x at σxy (i+½, j), ∂vy/∂z at σyz (i, j+½). */
function strainRatesSh(mem: Float32Array, vy: number, g: CellGrid, out: Float32Array, at: number): void {
  const r = g.rowFloats;
  const cells = g.nx * g.nz;
  for (let mz = 0; mz < g.nz; mz++) {
    for (let mx = 0; mx < g.nx; mx++) {
      const c = g.first + mz * r + mx;
      const k = at + mz * g.nx + mx;
      out[k] = FD_C1 * (mem[vy + c + 1] - mem[vy + c]) + FD_C2 * (mem[vy + c + 2] - mem[vy + c - 1]);
      out[k + cells] = FD_C1 * (mem[vy + c + r] - mem[vy + c]) + FD_C2 * (mem[vy + c + 2 * r] - mem[vy + c - r]);
    }
  }
}

/**
 * P-SV stiffness gradients at one kept step: b = −W·C⁻¹·q with q the adjoint stresses in the
 * buffer (2×2 block [[λ+2μ, λ], [λ, λ+2μ]] on σxx, σzz; σxx alone with the surface modulus and
 * W = ½ on a free-surface row), times the forward strain rates `e` (at `at`), times `weight`.
 * gM, gL, gMu: per cell, the coefficients of λ+2μ, λ and μ (all × dt/h).
 */
function correlatePsvStress(
  mem: Float32Array, o: FdSetup["layout"]["offsets"], g: CellGrid, surface: boolean,
  e: Float32Array, at: number, weight: number, gM: Float64Array, gL: Float64Array, gMu: Float64Array,
): void {
  const cells = g.nx * g.nz;
  for (let mz = 0; mz < g.nz; mz++) {
    const onSurface = surface && mz === 0;
    for (let mx = 0; mx < g.nx; mx++) {
      const c = g.first + mz * g.rowFloats + mx;
      const k = mz * g.nx + mx;
      const exx = e[at + k];
      const qxx = mem[o.f2 + c];
      const l = mem[o.m3 + c];
      if (onSurface) {
        gL[k] += weight * ((-0.5 * qxx) / l) * exx;
      } else {
        const ezz = e[at + cells + k];
        const m = mem[o.m2 + c];
        const qzz = mem[o.f3 + c];
        const det = m * m - l * l;
        const bxx = -(m * qxx - l * qzz) / det;
        const bzz = -(m * qzz - l * qxx) / det;
        gM[k] += weight * (bxx * exx + bzz * ezz);
        gL[k] += weight * (bxx * ezz + bzz * exx);
      }
      const mu = mem[o.m4 + c];
      if (mu > 0) gMu[k] += (weight * -mem[o.f4 + c] * e[at + 2 * cells + k]) / mu;
    }
  }
}

/** SH stiffness gradients at one kept step: μ on σxy (W = ½ on a free-surface row) and on σyz. */
function correlateShStress(
  mem: Float32Array, o: FdSetup["layout"]["offsets"], g: CellGrid, surface: boolean,
  e: Float32Array, at: number, weight: number, gMx: Float64Array, gMz: Float64Array,
): void {
  const cells = g.nx * g.nz;
  for (let mz = 0; mz < g.nz; mz++) {
    const wxy = surface && mz === 0 ? 0.5 : 1;
    for (let mx = 0; mx < g.nx; mx++) {
      const c = g.first + mz * g.rowFloats + mx;
      const k = mz * g.nx + mx;
      const mux = mem[o.m1 + c];
      const muz = mem[o.m2 + c];
      if (mux > 0) gMx[k] += (weight * -wxy * mem[o.f1 + c] * e[at + k]) / mux;
      if (muz > 0) gMz[k] += (weight * -mem[o.f2 + c] * e[at + cells + k]) / muz;
    }
  }
}

/**
 * Buoyancy gradient of one velocity component at a kept step: += weight·W/B²·v_n·(p_n − p_{n+1}),
 * with v_n the kept forward velocities (at `at`), p_n in the buffer and p_{n+1} in `before`
 * (at `beforeAt`); W = ½ on a free-surface row when `halfOnSurface`.
 */
function correlateBuoyancy(
  mem: Float32Array, field: number, buoy: number, g: CellGrid, halfOnSurface: boolean,
  v: Float32Array, at: number, before: Float32Array, beforeAt: number, weight: number, gB: Float64Array,
): void {
  for (let mz = 0; mz < g.nz; mz++) {
    const w = halfOnSurface && mz === 0 ? 0.5 * weight : weight;
    for (let mx = 0; mx < g.nx; mx++) {
      const c = g.first + mz * g.rowFloats + mx;
      const k = mz * g.nx + mx;
      const bv = mem[buoy + c];
      gB[k] += (w * v[at + k] * (mem[field + c] - before[beforeAt + k])) / (bv * bv);
    }
  }
}

/** Adds the adjoint source of step n at the read-out points: p += B·W⁻¹·w·(Rᵀ ∂J/∂d)[r, n]. */
function injectAdjoint(mem: Float32Array, rec: ReceiverStencil, scale: Float64Array, adj: Float64Array, steps: number, n: number): void {
  const nrec = rec.start.length - 1;
  for (let rr = 0; rr < nrec; rr++) {
    const a = adj[rr * steps + n];
    if (a === 0) continue;
    for (let k = rec.start[rr]; k < rec.start[rr + 1]; k++) {
      const idx = rec.index[k];
      mem[idx] = f32(mem[idx] + f32(scale[k] * a));
    }
  }
}

/**
 * The stress images above the free surface make the solver's divergence D differ from the
 * negative transpose of its strain rate E by Δ = c2 in two places (P-SV: vx row 1 from σxz row 0,
 * vz row 0 from σzz row 1; SH: vy row 1 from σyz row 0), where an image σ(−z) = −σ(z) meets the
 * c2 term. The adjoint needs D − Δ in its velocity half and E − W⁻¹ΔᵀW in its stress half: these
 * terms are taken out before (velocity half) and after (stress half) each kernel step, over the
 * whole row (absorbing columns included), and the images above the surface renewed.
 */
function surfaceCorrectionPsv(mem: Float32Array, L: FdSetup["layout"], half: "velocity" | "stress"): void {
  const o = L.offsets;
  const row0 = L.org;
  const row1 = L.org + L.rowFloats;
  const up = row0 - L.rowFloats;
  // f0 vx, f1 vz, f2 σxx, f3 σzz, f4 σxz; m0, m1 buoyancies, m2 λ+2μ, m3 λ, m4 μ (all × dt/h).
  const { f0, f1, f2, f3, f4, m0, m1, m2, m3, m4 } = o;
  const c2 = FD_C2;
  if (half === "velocity") {
    for (let i = 0; i < L.nx; i++) {
      mem[f0 + row1 + i] = f32(mem[f0 + row1 + i] - f32(mem[m0 + row1 + i] * f32(c2 * mem[f4 + row0 + i])));
      mem[f1 + row0 + i] = f32(mem[f1 + row0 + i] - f32(mem[m1 + row0 + i] * f32(c2 * mem[f3 + row1 + i])));
    }
    return;
  }
  for (let i = 0; i < L.nx; i++) {
    const pvx = mem[f0 + row1 + i];
    const pvz = mem[f1 + row0 + i];
    mem[f4 + row0 + i] = f32(mem[f4 + row0 + i] - f32(mem[m4 + row0 + i] * f32(c2 * pvx)));
    mem[f2 + row1 + i] = f32(mem[f2 + row1 + i] - f32(mem[m3 + row1 + i] * f32(c2 * pvz)));
    mem[f3 + row1 + i] = f32(mem[f3 + row1 + i] - f32(mem[m2 + row1 + i] * f32(c2 * pvz)));
    mem[f3 + up + i] = -mem[f3 + row1 + i];
    mem[f4 + up + i] = -mem[f4 + row0 + i];
  }
}

/** SH form of {@link surfaceCorrectionPsv}: f0 vy, f2 σyz; m0 buoyancy, m2 μ on σyz. */
function surfaceCorrectionSh(mem: Float32Array, L: FdSetup["layout"], half: "velocity" | "stress"): void {
  const { f0, f2, m0, m2 } = L.offsets;
  const row0 = L.org;
  const row1 = L.org + L.rowFloats;
  const up = row0 - L.rowFloats;
  const c2 = FD_C2;
  if (half === "velocity") {
    for (let i = 0; i < L.nx; i++) {
      mem[f0 + row1 + i] = f32(mem[f0 + row1 + i] - f32(mem[m0 + row1 + i] * f32(c2 * mem[f2 + row0 + i])));
    }
    return;
  }
  for (let i = 0; i < L.nx; i++) {
    mem[f2 + row0 + i] = f32(mem[f2 + row0 + i] - f32(mem[m2 + row0 + i] * f32(c2 * mem[f0 + row1 + i])));
    mem[f2 + up + i] = -mem[f2 + row0 + i];
  }
}

/** Gradients of the kernel's coefficients, per model cell (float64). */
interface CoefficientGradients {
  /** Buoyancy of each velocity component (P-SV vx, vz; SH vy). */
  buoyancy: Float64Array[];
  /** Stiffness: P-SV λ+2μ, λ, μ on σxz; SH μ on σxy, μ on σyz. */
  stiffness: Float64Array[];
}

/**
 * Coefficient gradients → λ, μ, ρ of the cells (through the staggered averages: arithmetic ρ on
 * velocity points, harmonic μ on shear-stress points, the surface modulus M − λ²/M on a free-surface
 * row; neighbours beyond the model edge are the edge cells, as the set-up extends them) → Vp, Vs, ρ.
 */
function toModelGradient(model: ElasticModel, mode: WaveMode, surface: boolean, s: number, g: CoefficientGradients, factor: number) {
  const { nx, nz } = model;
  const cells = nx * nz;
  const gLam = new Float64Array(cells);
  const gMu = new Float64Array(cells);
  const gRho = new Float64Array(cells);
  const muOf = (k: number) => model.rho[k] * model.vs[k] * model.vs[k];
  const cl = (mz: number, mx: number) => Math.min(nz - 1, mz) * nx + Math.min(nx - 1, mx);
  /** μ_h = n / Σ 1/μ_q over the n cells a, b (, c, d); ∂μ_h/∂μ_q = μ_h² / (n μ_q²). */
  const harmonic = (grad: number, a: number, b: number, c = -1, d = -1) => {
    const n = c < 0 ? 2 : 4;
    const ma = muOf(a);
    const mb = muOf(b);
    const mc = c < 0 ? 0 : muOf(c);
    const md = d < 0 ? 0 : muOf(d);
    const mh = n / (1 / ma + 1 / mb + (c < 0 ? 0 : 1 / mc + 1 / md));
    const f = (grad * s * mh * mh) / n;
    gMu[a] += f / (ma * ma);
    gMu[b] += f / (mb * mb);
    if (c >= 0) {
      gMu[c] += f / (mc * mc);
      gMu[d] += f / (md * md);
    }
  };
  /** Buoyancy dt/(h·ρ̄) of a velocity point, ρ̄ the mean of cells a and b: ∂B/∂ρ̄ = −B/ρ̄. */
  const buoyancy = (grad: number, a: number, b: number) => {
    const rbar = (model.rho[a] + model.rho[b]) / 2;
    const dRbar = (-grad * (s / rbar)) / rbar;
    gRho[a] += dRbar / 2;
    gRho[b] += dRbar / 2;
  };
  for (let mz = 0; mz < nz; mz++) {
    for (let mx = 0; mx < nx; mx++) {
      const k = mz * nx + mx;
      if (mode === "psv") {
        const [gM, gL, gS] = g.stiffness;
        buoyancy(g.buoyancy[0][k], k, cl(mz, mx + 1));
        buoyancy(g.buoyancy[1][k], k, cl(mz + 1, mx));
        const lam = model.rho[k] * (model.vp[k] ** 2 - 2 * model.vs[k] ** 2);
        const mu = muOf(k);
        if (surface && mz === 0) {
          const M = lam + 2 * mu;
          gLam[k] += s * (1 - lam / M) ** 2 * gL[k];
          gMu[k] += s * 2 * (1 + (lam * lam) / (M * M)) * gL[k];
        } else {
          gLam[k] += s * (gM[k] + gL[k]);
          gMu[k] += 2 * s * gM[k];
        }
        harmonic(gS[k], k, cl(mz, mx + 1), cl(mz + 1, mx), cl(mz + 1, mx + 1));
      } else {
        buoyancy(g.buoyancy[0][k], k, k);
        harmonic(g.stiffness[0][k], k, cl(mz, mx + 1));
        harmonic(g.stiffness[1][k], k, cl(mz + 1, mx));
      }
    }
  }
  const out = { vp: new Float32Array(cells), vs: new Float32Array(cells), rho: new Float32Array(cells) };
  for (let k = 0; k < cells; k++) {
    const vp = model.vp[k];
    const vs = model.vs[k];
    const rk = model.rho[k];
    const gl = gLam[k] * factor;
    const gm = gMu[k] * factor;
    out.vp[k] = mode === "psv" ? 2 * rk * vp * gl : 0;
    out.vs[k] = 2 * rk * vs * (gm - 2 * gl);
    out.rho[k] = gRho[k] * factor + (vp * vp - 2 * vs * vs) * gl + vs * vs * gm;
  }
  return out;
}

/**
 * Misfit, synthetics and (when asked) the gradient of the misfit with respect to Vp, Vs and
 * density of every model cell, for one shot. Throws FdSetupError (pipeline/kernels/fd/errors.ts)
 * on settings the solver refuses, RangeError on inconsistent arrays, AbortError when cancelled.
 */
export function shotGradient(input: ShotGradientInput): ShotGradientOutput {
  checkInput(input);
  const { model, shot } = input;
  const setup = prepareSimulation(model, shot, simulationOptions(input));
  const { mem, dt, steps, layout, mode } = setup;
  const o = layout.offsets;
  const nrec = shot.receiverX.length;
  const cells = model.nx * model.nz;
  const grid = cellGrid(setup);
  const surface = setup.freeSurface;
  const velocities = mode === "psv" ? [o.f0, o.f1] : [o.f0];
  const buoyancies = mode === "psv" ? [o.m0, o.m1] : [o.m0];
  const nv = velocities.length;

  const src = sourceInjection(setup, shot.sourceX, shot.sourceZ);
  const stf = sourceTimeFunction(setup, input.simulation.wavelet, src.atStress);
  const rec = receiverStencil(setup, shot.receiverX, shot.receiverZ);
  const raw = new Float32Array(nrec * steps);

  // Kept forward wavefield: per kept step the velocity components, then the strain rates.
  const K = input.wantGradient ? keepEverySteps(input.simulation.wavelet, dt) : 0;
  const kept = input.wantGradient ? Math.ceil(steps / K) : 0;
  const perStep = (mode === "psv" ? 5 : 3) * cells;
  const store = new Float32Array(kept * perStep);

  // ---- Forward solve (the WebAssembly kernel several steps per call, chunks ending on kept steps) ----
  runShotSteps(
    setup,
    src,
    stf,
    rec,
    raw,
    K === 0
      ? undefined
      : {
          wants: (n) => n % K === 0,
          visit(n) {
            const at = (n / K) * perStep;
            for (let q = 0; q < nv; q++) copyCells(mem, velocities[q], grid, store, at + q * cells);
            if (mode === "psv") strainRatesPsv(mem, o.f0, o.f1, grid, store, at + nv * cells);
            else strainRatesSh(mem, o.f0, grid, store, at + nv * cells);
          },
        },
    input.cancelFlag,
  );
  const synthetic = resampleRecords(raw, nrec, steps, dt, setup.output);
  const mis = misfitAndAdjoint({
    measure: input.measure,
    synthetic,
    observed: input.observed,
    traceCount: nrec,
    sampleCount: input.output.count,
    weights: input.traceWeights,
    firstSample: input.window?.firstSample,
    endSample: input.window?.endSample,
  });
  const result: ShotGradientOutput = {
    misfit: mis.misfit,
    traceMisfits: mis.traceMisfits,
    synthetic,
    forwardSolves: 1,
    adjointSolves: 0,
    storedWavefieldBytes: store.byteLength,
  };
  if (!input.wantGradient) return result;

  // Illumination: Σ over kept steps of the squared velocities, times K·dt.
  const illum = new Float64Array(cells);
  for (let s = 0; s < kept; s++) {
    for (let q = 0; q < nv; q++) {
      const at = s * perStep + q * cells;
      for (let k = 0; k < cells; k++) illum[k] += store[at + k] * store[at + k];
    }
  }
  const illumination = new Float32Array(cells);
  for (let k = 0; k < cells; k++) illumination[k] = illum[k] * K * dt;
  result.illumination = illumination;
  result.adjointSolves = 1;

  // ---- Adjoint source at the solver's steps: Rᵀ·∂J/∂d, scaled to a peak of 1 (undone at the end) ----
  const adjRaw = resampleRecordsTranspose(mis.adjoint, nrec, steps, dt, setup.output);
  let peak = 0;
  for (let k = 0; k < adjRaw.length; k++) peak = Math.max(peak, Math.abs(adjRaw[k]));
  if (peak === 0) {
    result.gradient = { vp: new Float32Array(cells), vs: new Float32Array(cells), rho: new Float32Array(cells) };
    return result;
  }
  // Injection weights B·W⁻¹·w at each read-out point (W = ½ on surface nodes of vx / vy), over the peak.
  const q0 = mode === "psv" && setup.component === "z" ? 1 : 0;
  const recField = velocities[q0];
  const adjScale = new Float64Array(rec.index.length);
  for (let k = 0; k < rec.index.length; k++) {
    const c = rec.index[k] - recField;
    const onSurfaceNode = surface && q0 === 0 && c - layout.org >= 0 && c - layout.org < layout.rowFloats;
    adjScale[k] = (mem[buoyancies[q0] + c] * (onSurfaceNode ? 2 : 1) * rec.weight[k]) / peak;
  }

  const grads: CoefficientGradients = {
    buoyancy: velocities.map(() => new Float64Array(cells)),
    stiffness: Array.from({ length: mode === "psv" ? 3 : 2 }, () => new Float64Array(cells)),
  };
  const before = new Float32Array(nv * cells);
  const correct = mode === "psv" ? surfaceCorrectionPsv : surfaceCorrectionSh;
  const [g0, g1, g2] = grads.stiffness;

  clearWavefield(setup);
  for (let n = steps - 1, it = 0; n >= 0; n--, it++) {
    if ((it & 63) === 0) throwIfCancelled(input.cancelFlag);
    const keptHere = n % K === 0;
    const at = keptHere ? (n / K) * perStep : 0;
    if (keptHere) {
      // b_n from q_n (the adjoint stresses now in the buffer) against E·v_n.
      if (mode === "psv") correlatePsvStress(mem, o, grid, surface, store, at + nv * cells, K, g0, g1, g2);
      else correlateShStress(mem, o, grid, surface, store, at + nv * cells, K, g0, g1);
      // p_{n+1}: the adjoint velocities before this step.
      for (let q = 0; q < nv; q++) copyCells(mem, velocities[q], grid, before, q * cells);
    }
    injectAdjoint(mem, rec, adjScale, adjRaw, steps, n);
    if (surface) correct(mem, layout, "velocity");
    setup.kernel.step();
    if (surface) correct(mem, layout, "stress");
    if (keptHere) {
      for (let q = 0; q < nv; q++) {
        correlateBuoyancy(mem, velocities[q], buoyancies[q], grid, surface && q === 0, store, at + q * cells, before, q * cells, K, grads.buoyancy[q]);
      }
    }
  }
  result.gradient = toModelGradient(model, mode, surface, dt / setup.h, grads, peak);
  return result;
}
