/**
 * Times the WebAssembly elastic kernel directly (pipeline/kernels/fd/wasm-kernel.ts), without the
 * shot driver: a homogeneous medium (Vp 1500, Vs 500 m/s, density 2000 kg/m³, 1 m cells, time step
 * 0.5 of the stability limit), convolutional PML profiles on the absorbing strips (Komatitsch &
 * Martin 2007, as the solver sets them), and a Ricker force on one cell near the surface added from
 * JavaScript before every step, as the solver adds its source. Used by the solver bench in worker
 * threads; prints nothing.
 */
import { createWasmKernel } from "./wasm-kernel";
import { maxStableDt } from "./checks";
import { ricker } from "./wavelet";
import type { WaveMode } from "./layout";

/** Options of {@link timeWasmKernel}. */
export interface KernelTimingOptions {
  mode: WaveMode;
  /** Model grid, cells (absorbing strips come on top). */
  nx: number;
  nz: number;
  /** Timed steps. */
  steps: number;
  /** Absorbing thickness, cells. Default 20. */
  pmlCells?: number;
  /** Stress-free top. Default true. */
  freeSurface?: boolean;
  /** Untimed steps first (the engine optimises a WebAssembly function on a later call). Default 20. */
  warmupSteps?: number;
  /**
   * 1: one `kernel.step()` call per step with the source added from JavaScript between calls (the
   * way the shot driver steps today). More: the kernel's stepper, this many steps per call, with
   * the source and two receiver cells handled inside the kernel. Default 1.
   */
  stepsPerCall?: number;
}

/** Result of {@link timeWasmKernel}. */
export interface KernelTiming {
  /** Elapsed seconds of the timed steps. */
  seconds: number;
  /** Model cells (nx × nz) and computational cells (with the absorbing strips). */
  modelCells: number;
  computationalCells: number;
  /** Sum of |field| of the recorded component after the last step (keeps the work observable). */
  checksum: number;
}

/** Runs `warmupSteps + steps` steps and times the last `steps`. */
export function timeWasmKernel(opts: KernelTimingOptions): KernelTiming {
  const { mode, nx, nz, steps } = opts;
  for (const [k, v] of Object.entries({ nx, nz, steps })) {
    if (!Number.isInteger(v) || v < 1) throw new RangeError(`${k} must be an integer ≥ 1, got ${v}`);
  }
  const pmlCells = opts.pmlCells ?? 20;
  const freeSurface = opts.freeSurface ?? true;
  const warm = opts.warmupSteps ?? 20;
  const perCall = opts.stepsPerCall ?? 1;
  if (!Number.isInteger(perCall) || perCall < 1) throw new RangeError(`stepsPerCall must be an integer ≥ 1, got ${perCall}`);
  const bound = createWasmKernel({ mode, modelNx: nx, modelNz: nz, pmlCells, freeSurface, maxStepsPerCall: Math.max(perCall, 1) });
  const { kernel, layout: L, mem } = bound;
  const vp = 1500;
  const vs = 500;
  const rho = 2000;
  const vmax = mode === "psv" ? vp : vs;
  const dt = 0.5 * maxStableDt(1, vmax);
  const s = dt;
  const mu = rho * vs * vs;
  const lam = rho * vp * vp - 2 * mu;
  const o = L.offsets;
  for (let j = 0; j < L.nrows; j++) {
    for (let i = 0; i < L.nx; i++) {
      const c = L.org + j * L.rowFloats + i;
      if (mode === "psv") {
        mem[o.m0 + c] = s / rho;
        mem[o.m1 + c] = s / rho;
        mem[o.m2 + c] = s * (lam + 2 * mu);
        mem[o.m3 + c] = freeSurface && j === 0 ? s * (lam + 2 * mu - (lam * lam) / (lam + 2 * mu)) : s * lam;
        mem[o.m4 + c] = s * mu;
      } else {
        mem[o.m0 + c] = s / rho;
        mem[o.m1 + c] = s * mu;
        mem[o.m2 + c] = s * mu;
      }
    }
  }
  // CPML profiles (Komatitsch & Martin 2007, κ = 1): d = d0 (x/L)², d0 = −3 vmax ln(R) / (2L),
  // α = π f0 (1 − x/L); b = exp(−(d + α) dt), a = d (b − 1) / (d + α); R = 1e-3.
  const peak = vs / (5 * 2.4);
  const d0 = (-3 * vmax * Math.log(1e-3)) / (2 * Math.max(1, pmlCells));
  const coef = (dist: number): [number, number] => {
    if (dist <= 0 || pmlCells === 0) return [0, 1];
    const x = Math.min(1, dist / pmlCells);
    const d = d0 * x * x;
    const alpha = Math.PI * peak * (1 - x);
    const b = Math.exp(-(d + alpha) * dt);
    return [(d * (b - 1)) / (d + alpha), b];
  };
  const xDist = (p: number) => Math.max(L.colOffset - p, p - (L.colOffset + nx - 1), 0);
  const zDist = (p: number) => Math.max(p - (L.rowOffset + nz - 1), freeSurface ? 0 : L.rowOffset - p, 0);
  for (let i = 0; i < L.nxv; i++) {
    const [aI, bI] = i < L.nx ? coef(xDist(i)) : [0, 1];
    const [aH, bH] = i < L.nx ? coef(xDist(i + 0.5)) : [0, 1];
    mem[o.axI + i] = aI;
    mem[o.bxI + i] = bI;
    mem[o.axH + i] = aH;
    mem[o.bxH + i] = bH;
  }
  for (let j = 0; j < L.nrows; j++) {
    const [aI, bI] = coef(zDist(j));
    const [aH, bH] = coef(zDist(j + 0.5));
    mem[o.azI + j] = aI;
    mem[o.bzI + j] = bI;
    mem[o.azH + j] = aH;
    mem[o.bzH + j] = bH;
  }
  const field = mode === "psv" ? o.f1 : o.f0;
  const at = field + L.org + (L.rowOffset + 2) * L.rowFloats + L.colOffset + (nx >> 1);
  let t0 = 0;
  if (perCall === 1) {
    for (let n = 0; n < warm + steps; n++) {
      if (n === warm) t0 = performance.now();
      mem[at] += 1e-3 * ricker(n * dt, peak, 1.2 / peak);
      kernel.step();
    }
  } else {
    const recRow = field + L.org + L.rowOffset * L.rowFloats + L.colOffset;
    const stepper = bound.createStepper({ sources: [{ index: at, mirror: -1 }], atStress: false, receivers: [recRow + 10, recRow + nx - 10] });
    const inc = new Float32Array(perCall);
    const run = (from: number, to: number) => {
      for (let n = from; n < to; n += perCall) {
        const count = Math.min(perCall, to - n);
        for (let q = 0; q < count; q++) inc[q] = 1e-3 * ricker((n + q) * dt, peak, 1.2 / peak);
        stepper.advance(n, count, inc);
      }
    };
    run(0, warm);
    t0 = performance.now();
    run(warm, warm + steps);
  }
  const seconds = (performance.now() - t0) / 1000;
  let checksum = 0;
  for (let k = field; k < field + L.gridFloats; k++) checksum += Math.abs(mem[k]);
  return { seconds, modelCells: nx * nz, computationalCells: L.nx * L.nrows, checksum };
}
