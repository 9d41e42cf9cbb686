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
 * free surface meets the c2 = −1/24 coefficient; see `surfaceCorrection`). What is not exactly
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
  inject,
  prepareSimulation,
  receiverStencil,
  recordReceivers,
  resampleRecords,
  resampleRecordsTranspose,
  runTimeSteps,
  sourceInjection,
  sourceTimeFunction,
  throwIfCancelled,
  type FdSetup,
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

/** Buffer offsets of the arrays the correlation reads, by mode. */
function arrays(setup: FdSetup) {
  const o = setup.layout.offsets;
  return setup.mode === "psv"
    ? { vel: [o.f0, o.f1], buoy: [o.m0, o.m1], sxx: o.f2, szz: o.f3, sxz: o.f4, cM: o.m2, cL: o.m3, cMu: o.m4 }
    : { vel: [o.f0], buoy: [o.m0], sxy: o.f1, syz: o.f2, cMx: o.m1, cMz: o.m2 };
}

/**
 * Misfit, synthetics and (when asked) the gradient of the misfit with respect to Vp, Vs and
 * density of every model cell, for one shot. Throws FdSetupError (pipeline/kernels/fd/errors.ts)
 * on settings the solver refuses, RangeError on inconsistent arrays, AbortError when cancelled.
 */
export function shotGradient(input: ShotGradientInput): ShotGradientOutput {
  checkInput(input);
  const { model, shot } = input;
  const opts = simulationOptions(input);
  const setup = prepareSimulation(model, shot, opts);
  const { mem, dt, steps, layout, mode } = setup;
  const nrec = shot.receiverX.length;
  const { nx, nz } = model;
  const cells = nx * nz;
  const r = layout.rowFloats;
  const cellIndex = (mz: number, mx: number) => layout.org + (mz + layout.rowOffset) * r + mx + layout.colOffset;
  const surface = setup.freeSurface;

  const src = sourceInjection(setup, shot.sourceX, shot.sourceZ);
  const stf = sourceTimeFunction(setup, input.simulation.wavelet, src.atStress);
  const rec = receiverStencil(setup, shot.receiverX, shot.receiverZ);
  const raw = new Float32Array(nrec * steps);

  // Kept forward wavefield: per kept step the velocity components, then the strain rates.
  const K = input.wantGradient ? keepEverySteps(input.simulation.wavelet, dt) : 0;
  const kept = input.wantGradient ? Math.ceil(steps / K) : 0;
  const fieldsPerStep = mode === "psv" ? 5 : 3;
  const store = new Float32Array(kept * fieldsPerStep * cells);
  const A = arrays(setup);
  const c1 = FD_C1;
  const c2 = FD_C2;

  /** Velocities and strain rates E·v of the current wavefield into the store at slot `slot`. */
  const keep = (slot: number) => {
    let base = slot * fieldsPerStep * cells;
    for (const f of A.vel) {
      for (let mz = 0; mz < nz; mz++) {
        const from = f + cellIndex(mz, 0);
        store.set(mem.subarray(from, from + nx), base + mz * nx);
      }
      base += cells;
    }
    if ("sxx" in A) {
      const [vx, vz] = A.vel;
      for (let mz = 0; mz < nz; mz++) {
        for (let mx = 0; mx < nx; mx++) {
          const c = cellIndex(mz, mx);
          const k = mz * nx + mx;
          // At σxx, σzz (i, j): ∂vx/∂x and ∂vz/∂z; at σxz (i+½, j+½): ∂vx/∂z + ∂vz/∂x (as the kernel).
          store[base + k] = c1 * (mem[vx + c] - mem[vx + c - 1]) + c2 * (mem[vx + c + 1] - mem[vx + c - 2]);
          store[base + cells + k] = c1 * (mem[vz + c] - mem[vz + c - r]) + c2 * (mem[vz + c + r] - mem[vz + c - 2 * r]);
          store[base + 2 * cells + k] =
            c1 * (mem[vx + c + r] - mem[vx + c]) + c2 * (mem[vx + c + 2 * r] - mem[vx + c - r]) +
            c1 * (mem[vz + c + 1] - mem[vz + c]) + c2 * (mem[vz + c + 2] - mem[vz + c - 1]);
        }
      }
    } else {
      const vy = A.vel[0];
      for (let mz = 0; mz < nz; mz++) {
        for (let mx = 0; mx < nx; mx++) {
          const c = cellIndex(mz, mx);
          const k = mz * nx + mx;
          // At σxy (i+½, j): ∂vy/∂x; at σyz (i, j+½): ∂vy/∂z.
          store[base + k] = c1 * (mem[vy + c + 1] - mem[vy + c]) + c2 * (mem[vy + c + 2] - mem[vy + c - 1]);
          store[base + cells + k] = c1 * (mem[vy + c + r] - mem[vy + c]) + c2 * (mem[vy + c + 2 * r] - mem[vy + c - r]);
        }
      }
    }
  };

  // ---- Forward solve ----
  runTimeSteps(
    setup.kernel,
    steps,
    {
      beforeStep(n) {
        if (!src.atStress) inject(mem, src, stf[n]);
        else if (n > 0) inject(mem, src, stf[n - 1]);
      },
      afterStep(n) {
        recordReceivers(mem, rec, raw, n, steps);
        if (K > 0 && n % K === 0) keep(n / K);
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

  // ---- Adjoint source at the solver's steps: Pᵀ·Rᵀ·∂J/∂d, scaled to a peak of 1 (undone at the end) ----
  const adjRaw = resampleRecordsTranspose(mis.adjoint, nrec, steps, dt, setup.output);
  let peak = 0;
  for (let k = 0; k < adjRaw.length; k++) peak = Math.max(peak, Math.abs(adjRaw[k]));
  const illumination = new Float32Array(cells);
  const illum = new Float64Array(cells);
  for (let s = 0; s < kept; s++) {
    const base = s * fieldsPerStep * cells;
    for (const [q] of A.vel.entries()) {
      for (let k = 0; k < cells; k++) illum[k] += store[base + q * cells + k] ** 2;
    }
  }
  for (let k = 0; k < cells; k++) illumination[k] = illum[k] * K * dt;
  result.illumination = illumination;
  result.adjointSolves = 1;
  const zero = () => ({ vp: new Float32Array(cells), vs: new Float32Array(cells), rho: new Float32Array(cells) });
  if (peak === 0) {
    result.gradient = zero();
    return result;
  }
  const scale = 1 / peak;
  // Injection weights B·W⁻¹ at each read-out point (W = ½ on surface nodes of vx / vy).
  const velField = rec.index.length > 0 ? A.vel[A.vel.length === 1 ? 0 : setup.component === "x" ? 0 : 1] : 0;
  const velBuoy = A.buoy[A.vel.indexOf(velField)];
  const surfaceWeighted = (field: number) => surface && field === A.vel[0];
  const inRow0 = (idx: number) => {
    const rel = idx - layout.org;
    return rel >= 0 && rel < r;
  };
  const adjScale = new Float64Array(rec.index.length);
  for (let k = 0; k < rec.index.length; k++) {
    const idx = rec.index[k];
    const c = idx - velField;
    const w = surfaceWeighted(velField) && inRow0(c) ? 2 : 1;
    adjScale[k] = mem[velBuoy + c] * w * rec.weight[k] * scale;
  }
  const f32 = Math.fround;

  // Coefficient gradients (float64), one array per coefficient, per model cell.
  const gB = A.vel.map(() => new Float64Array(cells));
  const gC = Array.from({ length: mode === "psv" ? 3 : 2 }, () => new Float64Array(cells));
  const pPrev = new Float32Array(A.vel.length * cells);

  /**
   * The stress images above the free surface make the solver's divergence D differ from the
   * negative transpose of its strain rate E by Δ = c2 in two places (P-SV: vx row 1 from σxz row 0,
   * vz row 0 from σzz row 1; SH: vy row 1 from σyz row 0), where an image σ(−z) = −σ(z) meets the
   * c2 term. The adjoint needs D − Δ in its velocity half and E − W⁻¹ΔᵀW in its stress half, so
   * these terms are taken out around each kernel step (over the whole row, absorbing columns
   * included), and the images above the surface renewed.
   */
  const row0 = layout.org;
  const row1 = layout.org + r;
  const o = layout.offsets;
  const [f0, f1, f2, f3, f4, m0, m1, m2, m3, m4] = [o.f0, o.f1, o.f2, o.f3, o.f4, o.m0, o.m1, o.m2, o.m3, o.m4];
  const surfaceCorrection = (half: "velocity" | "stress") => {
    const ncol = layout.nx;
    if (mode === "psv") {
      // f0 vx, f1 vz, f2 σxx, f3 σzz, f4 σxz; m0, m1 buoyancies, m2 λ+2μ, m3 λ, m4 μ (all × dt/h).
      if (half === "velocity") {
        for (let i = 0; i < ncol; i++) {
          mem[f0 + row1 + i] = f32(mem[f0 + row1 + i] - f32(mem[m0 + row1 + i] * f32(c2 * mem[f4 + row0 + i])));
          mem[f1 + row0 + i] = f32(mem[f1 + row0 + i] - f32(mem[m1 + row0 + i] * f32(c2 * mem[f3 + row1 + i])));
        }
      } else {
        for (let i = 0; i < ncol; i++) {
          const pvx = mem[f0 + row1 + i];
          const pvz = mem[f1 + row0 + i];
          mem[f4 + row0 + i] = f32(mem[f4 + row0 + i] - f32(mem[m4 + row0 + i] * f32(c2 * pvx)));
          mem[f2 + row1 + i] = f32(mem[f2 + row1 + i] - f32(mem[m3 + row1 + i] * f32(c2 * pvz)));
          mem[f3 + row1 + i] = f32(mem[f3 + row1 + i] - f32(mem[m2 + row1 + i] * f32(c2 * pvz)));
          mem[f3 + row0 - r + i] = -mem[f3 + row1 + i];
          mem[f4 + row0 - r + i] = -mem[f4 + row0 + i];
        }
      }
    } else if (half === "velocity") {
      // f0 vy, f2 σyz; m0 buoyancy, m2 μ on σyz.
      for (let i = 0; i < ncol; i++) {
        mem[f0 + row1 + i] = f32(mem[f0 + row1 + i] - f32(mem[m0 + row1 + i] * f32(c2 * mem[f2 + row0 + i])));
      }
    } else {
      for (let i = 0; i < ncol; i++) {
        mem[f2 + row0 + i] = f32(mem[f2 + row0 + i] - f32(mem[m2 + row0 + i] * f32(c2 * mem[f0 + row1 + i])));
        mem[f2 + row0 - r + i] = -mem[f2 + row0 + i];
      }
    }
  };

  clearWavefield(setup);
  const cancel = input.cancelFlag;
  for (let n = steps - 1, it = 0; n >= 0; n--, it++) {
    if ((it & 63) === 0) throwIfCancelled(cancel);
    const keptHere = n % K === 0;
    const slot = n / K;
    if (keptHere) {
      const base = slot * fieldsPerStep * cells;
      const eBase = base + A.vel.length * cells;
      // Stress coefficients: b_n = −W·C⁻¹ q_n with q_n the adjoint stresses now in the buffer.
      for (let mz = 0; mz < nz; mz++) {
        const onSurface = surface && mz === 0;
        for (let mx = 0; mx < nx; mx++) {
          const c = cellIndex(mz, mx);
          const k = mz * nx + mx;
          if (A.sxx !== undefined) {
            const exx = store[eBase + k];
            const ezz = store[eBase + cells + k];
            const exz = store[eBase + 2 * cells + k];
            const m = mem[A.cM + c];
            const l = mem[A.cL + c];
            const qxx = mem[A.sxx + c];
            if (onSurface) {
              // σxx alone, with the surface modulus held in the λ array (half cell: W = ½).
              const bxx = (-0.5 * qxx) / l;
              gC[1][k] += K * bxx * exx;
            } else {
              const qzz = mem[A.szz + c];
              const det = m * m - l * l;
              const bxx = -(m * qxx - l * qzz) / det;
              const bzz = -(m * qzz - l * qxx) / det;
              gC[0][k] += K * (bxx * exx + bzz * ezz);
              gC[1][k] += K * (bxx * ezz + bzz * exx);
            }
            const mu = mem[A.cMu + c];
            if (mu > 0) gC[2][k] += (K * -mem[A.sxz + c] * exz) / mu;
          } else {
            const mux = mem[A.cMx + c];
            const muz = mem[A.cMz + c];
            const wxy = onSurface ? 0.5 : 1;
            if (mux > 0) gC[0][k] += (K * -wxy * mem[A.sxy + c] * store[eBase + k]) / mux;
            if (muz > 0) gC[1][k] += (K * -mem[A.syz + c] * store[eBase + cells + k]) / muz;
          }
        }
      }
      // p_{n+1}: the adjoint velocities before this step's injection.
      A.vel.forEach((f, q) => {
        for (let mz = 0; mz < nz; mz++) {
          const from = f + cellIndex(mz, 0);
          pPrev.set(mem.subarray(from, from + nx), q * cells + mz * nx);
        }
      });
    }
    for (let rr = 0; rr < nrec; rr++) {
      const a = adjRaw[rr * steps + n];
      if (a === 0) continue;
      for (let k = rec.start[rr]; k < rec.start[rr + 1]; k++) {
        const idx = rec.index[k];
        mem[idx] = f32(mem[idx] + f32(adjScale[k] * a));
      }
    }
    if (surface) surfaceCorrection("velocity");
    setup.kernel.step();
    if (surface) surfaceCorrection("stress");
    if (keptHere) {
      // Buoyancy: ∂J/∂B_k += K·W_k/B_k² · v_n·(p_n − p_{n+1}).
      const base = slot * fieldsPerStep * cells;
      A.vel.forEach((f, q) => {
        const b = A.buoy[q];
        const g = gB[q];
        for (let mz = 0; mz < nz; mz++) {
          const w = surface && mz === 0 && q === 0 ? 0.5 : 1;
          for (let mx = 0; mx < nx; mx++) {
            const c = cellIndex(mz, mx);
            const k = mz * nx + mx;
            const bv = mem[b + c];
            g[k] += (K * w * store[base + q * cells + k] * (mem[f + c] - pPrev[q * cells + k])) / (bv * bv);
          }
        }
      });
    }
  }

  // ---- Coefficients → λ, μ, ρ of the cells → Vp, Vs, ρ ----
  const s = dt / setup.h;
  const gLam = new Float64Array(cells);
  const gMu = new Float64Array(cells);
  const gRho = new Float64Array(cells);
  const cl = (mz: number, mx: number) => Math.min(nz - 1, mz) * nx + Math.min(nx - 1, mx);
  const rho = (k: number) => model.rho[k];
  const muOf = (k: number) => model.rho[k] * model.vs[k] * model.vs[k];
  const lamOf = (k: number) => model.rho[k] * (model.vp[k] * model.vp[k] - 2 * model.vs[k] * model.vs[k]);
  /** Harmonic mean of μ over cells `ks` and its derivative added to gMu with weight g. */
  const harmonic = (ks: number[], g: number) => {
    let inv = 0;
    for (const k of ks) inv += 1 / muOf(k);
    const mh = ks.length / inv;
    for (const k of ks) gMu[k] += (g * s * mh * mh) / (ks.length * muOf(k) ** 2);
  };
  for (let mz = 0; mz < nz; mz++) {
    for (let mx = 0; mx < nx; mx++) {
      const k = mz * nx + mx;
      if (mode === "psv") {
        // Buoyancy of vx (i+½, j) and vz (i, j+½): dt/(h·ρ̄), ρ̄ the mean of two cells.
        for (const [q, k2] of [[0, cl(mz, mx + 1)], [1, cl(mz + 1, mx)]] as const) {
          const rbar = (rho(k) + rho(k2)) / 2;
          const dRbar = (-gB[q][k] * (s / rbar)) / rbar;
          gRho[k] += dRbar / 2;
          gRho[k2] += dRbar / 2;
        }
        const lam = lamOf(k);
        const mu = muOf(k);
        if (surface && mz === 0) {
          const M = lam + 2 * mu;
          gLam[k] += s * (1 - lam / M) ** 2 * gC[1][k];
          gMu[k] += s * 2 * (1 + (lam * lam) / (M * M)) * gC[1][k];
        } else {
          gLam[k] += s * (gC[0][k] + gC[1][k]);
          gMu[k] += 2 * s * gC[0][k];
        }
        harmonic([k, cl(mz, mx + 1), cl(mz + 1, mx), cl(mz + 1, mx + 1)], gC[2][k]);
      } else {
        gRho[k] += -gB[0][k] * (s / rho(k)) / rho(k);
        harmonic([k, cl(mz, mx + 1)], gC[0][k]);
        harmonic([k, cl(mz + 1, mx)], gC[1][k]);
      }
    }
  }
  const g = zero();
  for (let k = 0; k < cells; k++) {
    const vp = model.vp[k];
    const vs = model.vs[k];
    const rk = model.rho[k];
    const gl = gLam[k] * peak;
    const gm = gMu[k] * peak;
    g.vp[k] = mode === "psv" ? 2 * rk * vp * gl : 0;
    g.vs[k] = 2 * rk * vs * (gm - 2 * gl);
    g.rho[k] = gRho[k] * peak + (vp * vp - 2 * vs * vs) * gl + vs * vs * gm;
  }
  result.gradient = g;
  return result;
}
