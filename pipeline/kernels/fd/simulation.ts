/**
 * Runs one shot through an elastic model, in pieces that other solves (the inversion's adjoint)
 * reuse: set-up of the staggered material coefficients, the absorbing boundary and the kernel
 * ({@link prepareSimulation}); source injection ({@link sourceInjection}, {@link inject}); the
 * time loop with hooks before and after each step ({@link runTimeSteps}); receiver read-out
 * ({@link receiverStencil}, {@link recordReceivers}); and resampling to the output interval
 * ({@link resampleRecords}) with its transpose. {@link simulateShot} chains them.
 */
import type { ElasticModel } from "../../types";
import { checkGridAccuracy, checkModelCells, chooseTimeStep } from "./checks";
import { planLayout, type FdLayout, type WaveMode } from "./layout";
import { FLUSH_BELOW, createReferenceKernel, type FdKernel } from "./reference-kernel";
import { resampleBandLimitedTraces, resampleBandLimitedTranspose } from "../resample";
import { FdSetupError } from "./errors";
import { ricker, sampleWavelet, waveletBand, type SourceWavelet } from "./wavelet";
import { createWasmKernel, MAX_STEPPER_SOURCES, type Stepper, type SteppingPlan } from "./wasm-kernel";

/**
 * Source kinds: point forces on a velocity component, or an explosive (isotropic pressure)
 * source on the normal stresses. P-SV takes "force-z", "force-x", "explosive"; SH takes "force-y".
 */
export type SourceKind = "force-z" | "force-x" | "explosive" | "force-y";
/** Recorded particle-velocity component. */
export type VelocityComponent = "x" | "z" | "y";

/** Options of one simulation. Units SI. */
export interface SimulationOptions {
  mode: WaveMode;
  sourceKind: SourceKind;
  wavelet: SourceWavelet;
  /** Recorded component. Default "z" (P-SV) or "y" (SH). */
  component?: VelocityComponent;
  /** Absorbing (PML) thickness, cells. Default 20. */
  pmlCells?: number;
  /** Stress-free top surface (else absorbing on all four sides). Default true. */
  freeSurface?: boolean;
  /** Time step, s; chosen automatically when absent. */
  dtS?: number;
  /** Minimum grid points per shortest S wavelength. Default 5. */
  minPointsPerWavelength?: number;
  /** Output sampling of the traces. */
  output: { intervalS: number; count: number; startTimeS: number };
  /** Snapshot times, s, and component (default: the recorded one). */
  snapshotTimesS?: number[];
  snapshotComponent?: VelocityComponent;
  /** Kernel implementation. Default "wasm". */
  kernel?: "wasm" | "reference";
  /** PML theoretical reflection coefficient. Default 1e-3 (Komatitsch & Martin 2007). */
  pmlReflection?: number;
  /**
   * Largest half-width, cells, of an along-boundary average of the medium inside the absorbing
   * strips (growing from 0 at the model edge to this at the outer edge). Default 0: the strips
   * continue the edge cells. About 8 keeps long runs stable in models rough cell by cell at their
   * edges, which can otherwise grow slowly; it returns a few per cent at sharp layer boundaries.
   */
  pmlSmoothingCells?: number;
  /** When this shared flag becomes non-zero the run stops with an AbortError (checked every 64 steps). */
  cancelFlag?: Int32Array;
  /** Shared progress: element 0 receives the number of steps done at each cancel check (every 64 steps). */
  stepCounter?: Int32Array;
}

/** Positions of one shot, m (z positive down). */
export interface ShotPositions {
  sourceX: number;
  sourceZ: number;
  receiverX: ArrayLike<number>;
  receiverZ: ArrayLike<number>;
}

/** What a simulation returns. */
export interface SimulationResult {
  /** Traces, flat `[receiver][sample]` at the output sampling. */
  traces: Float32Array;
  /** Snapshot frames, flat `[frame][z][x]` on the model grid, and their actual times. */
  snapshots?: { timesS: number[]; frames: Float32Array; component: VelocityComponent };
  /** Time step used, s, and number of steps. */
  dtS: number;
  steps: number;
  /** Grid points per shortest S wavelength. */
  pointsPerWavelength: number;
}

const f32 = Math.fround;
/** Values below 2^-100 become zero, as the kernels store them (see reference-kernel.ts). */
const flushToZero = (x: number) => (Math.abs(x) < FLUSH_BELOW ? 0 : x);

/** Grid offsets (column, row) of each quantity's staggered position. */
function stagger(component: VelocityComponent | "stress"): [number, number] {
  if (component === "x") return [0.5, 0];
  if (component === "z") return [0, 0.5];
  return [0, 0];
}

/** Float offset of a particle-velocity component's array in the buffer. */
export function fieldOf(layout: FdLayout, component: VelocityComponent): number {
  const o = layout.offsets;
  if (layout.mode === "sh") {
    if (component !== "y") throw new FdSetupError(`SH records only the y component, got "${component}".`, "component");
    return o.f0;
  }
  switch (component) {
    case "x":
      return o.f0;
    case "z":
      return o.f1;
    default:
      throw new FdSetupError(`P-SV records the x or z component, got "${component}".`, "component");
  }
}

/** Bilinear weights of a point onto its component's grid (comp coordinates), rows clamped at a free surface. */
export function pointStencil(layout: FdLayout, col: number, row: number, component: VelocityComponent | "stress") {
  const [ox, oz] = stagger(component);
  const u = col - ox;
  let w = row - oz;
  // Above the free surface the grid holds no medium: use the first row below it.
  if (layout.freeSurface && w < 0) w = 0;
  const i0 = Math.floor(u);
  const j0 = Math.floor(w);
  const fu = u - i0;
  const fw = w - j0;
  const out: Array<{ index: number; weight: number; row: number; col: number }> = [];
  const add = (j: number, i: number, wt: number) => {
    if (wt > 1e-9) out.push({ index: layout.org + j * layout.rowFloats + i, weight: wt, row: j, col: i });
  };
  add(j0, i0, (1 - fu) * (1 - fw));
  add(j0, i0 + 1, fu * (1 - fw));
  add(j0 + 1, i0, (1 - fu) * fw);
  add(j0 + 1, i0 + 1, fu * fw);
  return out;
}

/** Fills material and PML coefficient arrays for `model` into `mem`. */
function fillCoefficients(
  layout: FdLayout,
  mem: Float32Array,
  model: ElasticModel,
  dt: number,
  vmax: number,
  f0: number,
  reflection: number,
  smoothingCells = 0,
) {
  const { nx, nrows, nxv, rowFloats, org, colOffset, rowOffset, modelNx, modelNz } = layout;
  const h = model.spacingM;
  const s = dt / h;
  // Cell properties on the computational grid, extended into the absorbing strips.
  const nc = nx * nrows;
  const rho = new Float64Array(nc);
  const lam = new Float64Array(nc);
  const mu = new Float64Array(nc);
  const cell = (mz: number, mx: number, out: Float64Array) => {
    const k = mz * modelNx + mx;
    const r = model.rho[k];
    const vs = model.vs[k];
    const vp = model.vp[k];
    out[0] = r;
    out[1] = r * vs * vs;
    out[2] = r * (vp * vp - 2 * vs * vs);
  };
  const one = new Float64Array(3);
  const sum = new Float64Array(3);
  const half = smoothingCells;
  for (let j = 0; j < nrows; j++) {
    const mz = Math.min(modelNz - 1, Math.max(0, j - rowOffset));
    const zOut = j - rowOffset < 0 || j - rowOffset >= modelNz;
    for (let i = 0; i < nx; i++) {
      const mx = Math.min(modelNx - 1, Math.max(0, i - colOffset));
      const xOut = i - colOffset < 0 || i - colOffset >= modelNx;
      if (xOut === zOut) {
        // Inside the model, or a corner: the (edge) cell itself.
        cell(mz, mx, sum);
      } else {
        // Absorbing strip: the edge cells, averaged along the boundary when asked. A PML over a
        // medium that is rough cell by cell along the boundary can grow slowly after many steps
        // (observed with independent random Vp and Vs per cell and a free surface); the average
        // keeps such runs stable but returns some energy at sharp layer boundaries (measured: 4 %
        // of the direct wave at a Vp jump from 400 to 1600 m/s with ±8 cells, against 0.1 %
        // without), so it is off by default.
        sum.fill(0);
        let n = 0;
        const depth = xOut ? Math.max(colOffset - i, i - (colOffset + modelNx - 1)) : Math.max(rowOffset - j, j - (rowOffset + modelNz - 1));
        // The averaging width grows from none at the model edge to ±half at the outer edge, so a
        // wave meets the smoothed medium gradually, while it is being absorbed.
        const hw = Math.round((half * depth) / Math.max(1, layout.pmlCells));
        for (let d = -hw; d <= hw; d++) {
          if (xOut) {
            const z = mz + d;
            if (z < 0 || z >= modelNz) continue;
            cell(z, mx, one);
          } else {
            const x = mx + d;
            if (x < 0 || x >= modelNx) continue;
            cell(mz, x, one);
          }
          sum[0] += one[0];
          sum[1] += one[1];
          sum[2] += one[2];
          n++;
        }
        sum[0] /= n;
        sum[1] /= n;
        sum[2] /= n;
      }
      rho[j * nx + i] = sum[0];
      mu[j * nx + i] = sum[1];
      lam[j * nx + i] = sum[2];
    }
  }
  const at = (a: Float64Array, j: number, i: number) => a[Math.min(nrows - 1, j) * nx + Math.min(nx - 1, i)];
  const harm = (...v: number[]) => {
    let sInv = 0;
    for (const x of v) {
      if (x <= 0) return 0;
      sInv += 1 / x;
    }
    return v.length / sInv;
  };
  const o = layout.offsets;
  for (let j = 0; j < nrows; j++) {
    for (let i = 0; i < nx; i++) {
      const c = org + j * rowFloats + i;
      if (layout.mode === "psv") {
        // Density averaged arithmetically onto velocity positions, μ harmonically onto σxz
        // (common practice for staggered grids; Moczo et al. 2002).
        mem[o.m0 + c] = s / ((at(rho, j, i) + at(rho, j, i + 1)) / 2);
        mem[o.m1 + c] = s / ((at(rho, j, i) + at(rho, j + 1, i)) / 2);
        mem[o.m2 + c] = s * (at(lam, j, i) + 2 * at(mu, j, i));
        const lm = at(lam, j, i);
        const mm = lm + 2 * at(mu, j, i);
        // On a free surface row the λ array holds the modulus of σxx when σzz = 0: M − λ²/M (Levander 1988).
        mem[o.m3 + c] = layout.freeSurface && j === 0 ? s * (mm - (lm * lm) / mm) : s * lm;
        mem[o.m4 + c] = s * harm(at(mu, j, i), at(mu, j, i + 1), at(mu, j + 1, i), at(mu, j + 1, i + 1));
      } else {
        mem[o.m0 + c] = s / at(rho, j, i);
        mem[o.m1 + c] = s * harm(at(mu, j, i), at(mu, j, i + 1));
        mem[o.m2 + c] = s * harm(at(mu, j, i), at(mu, j + 1, i));
      }
    }
  }
  // CPML profiles (Komatitsch & Martin 2007, κ = 1): d = d0 (x/L)², d0 = −3 vmax ln(R) / (2L),
  // α = π f0 (1 − x/L); b = exp(−(d + α) dt), a = d (b − 1) / (d + α).
  const npml = layout.pmlCells;
  if (npml === 0) return;
  const L = npml * h;
  const d0 = (-3 * vmax * Math.log(reflection)) / (2 * L);
  const alphaMax = Math.PI * f0;
  const coef = (dist: number): [number, number] => {
    if (dist <= 0) return [0, 1];
    const x = Math.min(1, dist / npml);
    const d = d0 * x * x;
    const alpha = alphaMax * (1 - x);
    const b = Math.exp(-(d + alpha) * dt);
    return [(d * (b - 1)) / (d + alpha), b];
  };
  const xDist = (p: number) => Math.max(colOffset - p, p - (colOffset + modelNx - 1), 0);
  const zDist = (p: number) => {
    const bottom = p - (rowOffset + modelNz - 1);
    const top = layout.freeSurface ? 0 : rowOffset - p;
    return Math.max(bottom, top, 0);
  };
  for (let i = 0; i < nxv; i++) {
    const inside = i < nx;
    const [aI, bI] = inside ? coef(xDist(i)) : [0, 1];
    const [aH, bH] = inside ? coef(xDist(i + 0.5)) : [0, 1];
    mem[o.axI + i] = aI;
    mem[o.bxI + i] = bI;
    mem[o.axH + i] = aH;
    mem[o.bxH + i] = bH;
  }
  for (let j = 0; j < nrows; j++) {
    const [aI, bI] = coef(zDist(j));
    const [aH, bH] = coef(zDist(j + 0.5));
    mem[o.azI + j] = aI;
    mem[o.bzI + j] = bI;
    mem[o.azH + j] = aH;
    mem[o.bzH + j] = bH;
  }
}

function checkInside(model: ElasticModel, x: number, z: number, what: string, field: string) {
  const xMax = model.originX + (model.nx - 1) * model.spacingM;
  const zMax = model.originZ + (model.nz - 1) * model.spacingM;
  if (!(x >= model.originX && x <= xMax && z >= model.originZ && z <= zMax)) {
    throw new FdSetupError(
      `${what} at x = ${x} m, z = ${z} m lies outside the model (x ${model.originX} to ${xMax} m, z ${model.originZ} to ${zMax} m): extend the model or move it.`,
      field,
    );
  }
}

/**
 * Allocates and binds a kernel for a model grid. The WebAssembly kernel comes with its stepper
 * (room for `maxReceiverPoints` receiver cells, default 2048); the reference kernel has none.
 */
export function createKernel(
  kind: "wasm" | "reference",
  opts: { mode: WaveMode; modelNx: number; modelNz: number; pmlCells: number; freeSurface: boolean; maxReceiverPoints?: number },
): { kernel: FdKernel; layout: FdLayout; mem: Float32Array; createStepper?: (plan: SteppingPlan) => Stepper } {
  if (kind === "wasm") return createWasmKernel(opts);
  const layout = planLayout(opts);
  const mem = new Float32Array(layout.totalBytes / 4);
  return { kernel: createReferenceKernel(layout, mem), layout, mem };
}

/**
 * The checks {@link simulateShot} makes before any time step, and the values they settle:
 * unphysical cells, accuracy (points per shortest S wavelength), stability (time step), source and
 * receivers inside the model. Throws FdSetupError naming the value to change.
 */
export function checkSimulation(model: ElasticModel, shot: ShotPositions, opts: SimulationOptions) {
  const mode = opts.mode;
  if (mode !== "psv" && mode !== "sh") throw new RangeError(`mode must be "psv" or "sh", got ${String(mode)}`);
  const component = opts.component ?? (mode === "psv" ? "z" : "y");
  const sourceKind = opts.sourceKind;
  if (mode === "sh" && sourceKind !== "force-y") throw new FdSetupError(`SH needs sourceKind "force-y", got "${sourceKind}".`, "sourceKind");
  if (mode === "psv" && sourceKind === "force-y") throw new FdSetupError(`P-SV takes "force-z", "force-x" or "explosive", got "force-y".`, "sourceKind");
  const pmlCells = opts.pmlCells ?? 20;
  const freeSurface = opts.freeSurface ?? true;
  const minPoints = opts.minPointsPerWavelength ?? 5;
  const { intervalS, count, startTimeS } = opts.output;
  if (!(intervalS > 0)) throw new RangeError(`output.intervalS must be > 0, got ${intervalS}`);
  if (!Number.isInteger(count) || count < 1) throw new RangeError(`output.count must be an integer ≥ 1, got ${count}`);
  const nrec = shot.receiverX.length;
  if (shot.receiverZ.length !== nrec) throw new RangeError(`receiverZ has ${shot.receiverZ.length} entries, receiverX ${nrec}`);

  // Checks before any time step.
  if (model.nx < 8 || model.nz < 8) {
    throw new FdSetupError(`The model has ${model.nx} × ${model.nz} cells; the solver needs at least 8 × 8: refine or enlarge the grid.`, "model");
  }
  const { vpMax, vsMin, vsMax } = checkModelCells(model);
  const band = waveletBand(opts.wavelet);
  const h = model.spacingM;
  const points = checkGridAccuracy(h, vsMin, band.maxHz, minPoints);
  const vmax = mode === "psv" ? vpMax : vsMax;
  const dt = chooseTimeStep(h, vmax, opts.dtS, intervalS);
  checkInside(model, shot.sourceX, shot.sourceZ, "The source", "sourceX");
  for (let r = 0; r < nrec; r++) checkInside(model, shot.receiverX[r], shot.receiverZ[r], `Receiver ${r + 1}`, "receiverX");
  return { mode, component, sourceKind, pmlCells, freeSurface, intervalS, count, startTimeS, nrec, band, h, points, vmax, dt };
}

/** A kernel bound to one model and shot's time axis, its coefficients filled: what every solve starts from. */
export interface FdSetup {
  model: ElasticModel;
  kernel: FdKernel;
  /**
   * Several-steps-per-call stepping of the WebAssembly kernel (absent for the reference kernel),
   * with room for `stepperReceiverPoints` receiver cells; used by {@link runShotSteps}.
   */
  createStepper?: (plan: SteppingPlan) => Stepper;
  stepperReceiverPoints: number;
  layout: FdLayout;
  /** The kernel's whole buffer as float32 (fields, coefficients, absorbing memory). */
  mem: Float32Array;
  mode: WaveMode;
  component: VelocityComponent;
  sourceKind: SourceKind;
  freeSurface: boolean;
  /** Grid spacing, m; time step, s; number of steps; grid points per shortest S wavelength. */
  h: number;
  dt: number;
  steps: number;
  pointsPerWavelength: number;
  /** Output sampling of the traces. */
  output: { intervalS: number; count: number; startTimeS: number };
}

/**
 * Set-up of one solve: the checks of {@link checkSimulation}, a fresh kernel (fields zero), the
 * staggered material coefficients and the absorbing-boundary profiles, and the time axis (steps
 * up to 8 output intervals past the last output sample). Velocities after step n belong to
 * t = (n + ½)·dt.
 */
export function prepareSimulation(model: ElasticModel, shot: ShotPositions, opts: SimulationOptions): FdSetup {
  const { mode, component, sourceKind, pmlCells, freeSurface, intervalS, count, startTimeS, band, h, points, vmax, dt } =
    checkSimulation(model, shot, opts);
  // Room for every receiver's read-out cells (at most four each, bilinear) in the stepper.
  const stepperReceiverPoints = Math.max(2048, 4 * shot.receiverX.length);
  const { kernel, layout, mem, createStepper } = createKernel(opts.kernel ?? "wasm", {
    mode, modelNx: model.nx, modelNz: model.nz, pmlCells, freeSurface, maxReceiverPoints: stepperReceiverPoints,
  });
  const smoothing = opts.pmlSmoothingCells ?? 0;
  if (!Number.isInteger(smoothing) || smoothing < 0) throw new RangeError(`pmlSmoothingCells must be an integer ≥ 0, got ${smoothing}`);
  fillCoefficients(layout, mem, model, dt, vmax, band.peakHz > 0 ? band.peakHz : 1 / (10 * dt), opts.pmlReflection ?? 1e-3, smoothing);
  const tEnd = startTimeS + (count - 1) * intervalS + 8 * Math.max(intervalS, dt);
  const steps = Math.max(1, Math.ceil(tEnd / dt + 0.5));
  return {
    model, kernel, createStepper, stepperReceiverPoints, layout, mem, mode, component, sourceKind, freeSurface, h, dt, steps, pointsPerWavelength: points,
    output: { intervalS, count, startTimeS },
  };
}

/** Computational column and row (fractional) of a point of the model, m. */
function gridPosition(setup: FdSetup, x: number, z: number): [number, number] {
  const { layout, model, h } = setup;
  return [layout.colOffset + (x - model.originX) / h, layout.rowOffset + (z - model.originZ) / h];
}

/**
 * Where and how strongly a source enters: buffer indices with a scale per unit of the
 * source-time function, the mirror index kept opposite above a free surface (or −1), and whether
 * the source acts on stresses (explosive) or velocities (forces).
 */
export interface SourceInjection {
  index: Int32Array;
  scale: Float64Array;
  mirror: Int32Array;
  atStress: boolean;
}

/**
 * The injection of a shot's source: a force on a velocity component (impulse dt·F/(ρ h²) per
 * step, ρ from the buoyancy array, which holds dt/(ρ h)), or explosive on σxx and σzz
 * (−dt·S/h², outward motion for S > 0), spread bilinearly over the nearest grid points.
 */
export function sourceInjection(setup: FdSetup, sourceX: number, sourceZ: number): SourceInjection {
  const { layout, mem, h, dt, freeSurface, sourceKind } = setup;
  const [sc, sr] = gridPosition(setup, sourceX, sourceZ);
  const src: Array<{ index: number; scale: number; mirror: number }> = [];
  let atStress = false;
  if (sourceKind === "explosive") {
    atStress = true;
    for (const p of pointStencil(layout, sc, sr, "stress")) {
      const scale = (-dt / (h * h)) * p.weight;
      src.push({ index: layout.offsets.f2 + p.index, scale, mirror: -1 });
      // σzz stays zero on a free surface; below it its mirror image above is kept in step.
      if (!(freeSurface && p.row === 0)) {
        const mirror = freeSurface && p.row <= 2 ? layout.offsets.f3 + p.index - 2 * p.row * layout.rowFloats : -1;
        src.push({ index: layout.offsets.f3 + p.index, scale, mirror });
      }
    }
  } else {
    const comp: VelocityComponent = sourceKind === "force-x" ? "x" : sourceKind === "force-z" ? "z" : "y";
    const field = fieldOf(layout, comp);
    const buoy = layout.offsets.m0 + (comp === "z" ? layout.offsets.m1 - layout.offsets.m0 : 0);
    for (const p of pointStencil(layout, sc, sr, comp)) {
      src.push({ index: field + p.index, scale: (mem[buoy + p.index] / h) * p.weight, mirror: -1 });
    }
  }
  return {
    index: Int32Array.from(src, (s) => s.index),
    scale: Float64Array.from(src, (s) => s.scale),
    mirror: Int32Array.from(src, (s) => s.mirror),
    atStress,
  };
}

/**
 * Adds `value` times the injection's scales to the buffer, each sum rounded to float32 and
 * flushed as the kernels store values (mirrors above a free surface kept opposite).
 */
export function inject(mem: Float32Array, src: SourceInjection, value: number): void {
  const { index, scale, mirror } = src;
  for (let k = 0; k < index.length; k++) {
    const i = index[k];
    mem[i] = flushToZero(f32(mem[i] + f32(scale[k] * value)));
    if (mirror[k] >= 0) mem[mirror[k]] = -mem[i];
  }
}

/** Bilinear read-out weights of receivers: receiver r uses `index`/`weight` entries `start[r]` to `start[r + 1]` − 1. */
export interface ReceiverStencil {
  index: Int32Array;
  weight: Float64Array;
  start: Int32Array;
}

/** Read-out weights of every receiver of a shot on the component's staggered grid. */
export function receiverStencil(setup: FdSetup, receiverX: ArrayLike<number>, receiverZ: ArrayLike<number>, component = setup.component): ReceiverStencil {
  const nrec = receiverX.length;
  const recField = fieldOf(setup.layout, component);
  const idx: number[] = [];
  const wt: number[] = [];
  const start = new Int32Array(nrec + 1);
  for (let r = 0; r < nrec; r++) {
    start[r] = idx.length;
    const [col, row] = gridPosition(setup, receiverX[r], receiverZ[r]);
    for (const p of pointStencil(setup.layout, col, row, component)) {
      idx.push(recField + p.index);
      wt.push(p.weight);
    }
  }
  start[nrec] = idx.length;
  return { index: Int32Array.from(idx), weight: Float64Array.from(wt), start };
}

/** Records every receiver into `raw[r·stride + n]` (float32) from the current wavefield. */
export function recordReceivers(mem: Float32Array, rec: ReceiverStencil, raw: Float32Array, n: number, stride: number): void {
  const nrec = rec.start.length - 1;
  for (let r = 0; r < nrec; r++) {
    let acc = 0;
    for (let k = rec.start[r]; k < rec.start[r + 1]; k++) acc += mem[rec.index[k]] * rec.weight[k];
    raw[r * stride + n] = acc;
  }
}

/** Hooks of {@link runTimeSteps}, called with the step number n = 0 … steps − 1. */
export interface StepHooks {
  /** Before step n: sources enter here (see {@link simulateShot} for their timing). */
  beforeStep?(n: number): void;
  /** After step n: velocities at (n + ½)·dt and stresses at (n + 1)·dt are in the buffer. */
  afterStep?(n: number): void;
}

/** Throws an AbortError when `flag` (shared) is non-zero. */
export function throwIfCancelled(flag: Int32Array | undefined): void {
  if (flag && Atomics.load(flag, 0) !== 0) {
    const err = new Error("cancelled");
    err.name = "AbortError";
    throw err;
  }
}

/**
 * The time loop: `steps` kernel steps with hooks before and after each, the shared cancel flag
 * checked every 64 steps (an AbortError then), the steps done so far stored in `stepCounter`
 * at each check.
 */
export function runTimeSteps(kernel: FdKernel, steps: number, hooks: StepHooks, cancelFlag?: Int32Array, stepCounter?: Int32Array): void {
  const { beforeStep, afterStep } = hooks;
  for (let n = 0; n < steps; n++) {
    if ((n & 63) === 0) {
      if (stepCounter) Atomics.store(stepCounter, 0, n);
      throwIfCancelled(cancelFlag);
    }
    beforeStep?.(n);
    kernel.step();
    afterStep?.(n);
  }
}

/** Steps of {@link runShotSteps} after which the caller reads the wavefield. */
export interface WavefieldVisits {
  /** Whether the wavefield after step n is wanted. */
  wants(n: number): boolean;
  /** Called after step n when `wants(n)`: velocities at (n + ½)·dt and stresses at (n + 1)·dt are in the buffer. */
  visit(n: number): void;
}

/**
 * The forward time loop of one shot: the source enters before each step (see {@link simulateShot}
 * for its timing: value `stf[n]` before step n for a force, `stf[n − 1]` for an explosive source,
 * none before step 0), every receiver is recorded into `raw[r·steps + n]` (float32, as
 * {@link recordReceivers}) after each step, and `visits.visit(n)` is called after each wanted step.
 *
 * The WebAssembly kernel runs with its stepper (up to 64 steps per call, the increments added and
 * the receiver cells captured inside the kernel), in chunks that end on multiples of 64 and on
 * every wanted step; the reference kernel (or a shot beyond the stepper's room) runs one step per
 * call through {@link runTimeSteps}. Traces and wavefields are the same bit for bit either way
 * (same float32 increments and flushes, read-out summed in the same order). The cancel flag and
 * `stepCounter` are handled as by {@link runTimeSteps} (every 64 steps).
 */
export function runShotSteps(
  setup: FdSetup,
  src: SourceInjection,
  stf: ArrayLike<number>,
  rec: ReceiverStencil,
  raw: Float32Array,
  visits?: WavefieldVisits,
  cancelFlag?: Int32Array,
  stepCounter?: Int32Array,
): void {
  const { mem, steps } = setup;
  const ns = src.index.length;
  const nr = rec.index.length;
  if (raw.length < (rec.start.length - 1) * steps) throw new RangeError(`raw must hold receivers × steps = ${(rec.start.length - 1) * steps} values, got ${raw.length}`);
  if (!setup.createStepper || ns > MAX_STEPPER_SOURCES || nr > setup.stepperReceiverPoints) {
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
          if (visits?.wants(n)) visits.visit(n);
        },
      },
      cancelFlag,
      stepCounter,
    );
    return;
  }
  const stepper = setup.createStepper({
    sources: Array.from(src.index, (index, e) => ({ index, mirror: src.mirror[e] })),
    atStress: src.atStress,
    receivers: rec.index,
  });
  const nrec = rec.start.length - 1;
  const { scale } = src;
  const { start, weight } = rec;
  const increments = new Float32Array(stepper.maxSteps * ns);
  for (let n = 0; n < steps; ) {
    if ((n & 63) === 0) {
      if (stepCounter) Atomics.store(stepCounter, 0, n);
      throwIfCancelled(cancelFlag);
    }
    // This chunk: steps n .. end − 1, ending at the next multiple of 64 or after a wanted step.
    let end = Math.min(steps, (n | 63) + 1, n + stepper.maxSteps);
    let visitLast = false;
    if (visits) {
      for (let m = n; m < end; m++) {
        if (visits.wants(m)) {
          end = m + 1;
          visitLast = true;
          break;
        }
      }
    }
    const count = end - n;
    for (let q = 0; q < count; q++) {
      const step = n + q;
      // The kernel adds nothing before step 0 of a stress source.
      const v = src.atStress ? (step > 0 ? stf[step - 1] : 0) : stf[step];
      for (let e = 0; e < ns; e++) increments[q * ns + e] = f32(scale[e] * v);
    }
    const cap = stepper.advance(n, count, increments);
    for (let r = 0; r < nrec; r++) {
      const row = r * steps + n;
      for (let q = 0; q < count; q++) {
        const at = q * nr;
        let acc = 0;
        for (let k = start[r]; k < start[r + 1]; k++) acc += cap[at + k] * weight[k];
        raw[row + q] = acc;
      }
    }
    if (visitLast) visits?.visit(end - 1);
    n = end;
  }
}

/** Time of raw sample 0 (velocities after step 0), s. */
export const rawStartS = (dt: number) => 0.5 * dt;

/** Brings raw receiver records `[receiver][step]` to the output sampling, `[receiver][sample]`. */
export function resampleRecords(raw: Float32Array, nrec: number, steps: number, dt: number, output: FdSetup["output"]): Float32Array {
  const { intervalS, count, startTimeS } = output;
  const traces = new Float32Array(nrec * count);
  resampleBandLimitedTraces(raw, rawStartS(dt), dt, startTimeS, intervalS, count, traces, steps, nrec);
  return traces;
}

/**
 * Transpose of {@link resampleRecords}: values at the output sampling `[receiver][sample]` to the
 * solver's steps `[receiver][step]` (float64), the weights of the forward map exactly.
 */
export function resampleRecordsTranspose(traces: ArrayLike<number>, nrec: number, steps: number, dt: number, output: FdSetup["output"]): Float64Array {
  const { intervalS, count, startTimeS } = output;
  const raw = new Float64Array(nrec * steps);
  resampleBandLimitedTranspose(traces, rawStartS(dt), dt, startTimeS, intervalS, count, raw, steps, nrec);
  return raw;
}

/** The source-time function at the injection times of each step (see {@link simulateShot}). */
export function sourceTimeFunction(setup: FdSetup, wavelet: SourceWavelet, atStress: boolean): Float64Array {
  return sampleWavelet(wavelet, atStress ? 0.5 * setup.dt : 0, setup.dt, setup.steps);
}

/** Copies one component of the wavefield on the model cells (not the absorbing strips) into `out[offset …]`, `[z][x]`. */
export function copyModelCells(setup: FdSetup, component: VelocityComponent, out: Float32Array, offset: number): void {
  const { layout, model, mem } = setup;
  const field = fieldOf(layout, component);
  for (let iz = 0; iz < model.nz; iz++) {
    const from = field + layout.org + (iz + layout.rowOffset) * layout.rowFloats + layout.colOffset;
    out.set(mem.subarray(from, from + model.nx), offset + iz * model.nx);
  }
}

/**
 * Models one shot. Refuses unphysical cells, unstable time steps and too coarse grids before
 * any time step (FdSetupError naming the value to change).
 *
 * Sources enter between steps: a force adds its impulse dt·F(t_n)/(ρh²) to the velocities before
 * step n updates them; an explosive source adds to the stresses of step n−1, at (n − ½)·dt, before
 * step n reads them. Receivers read the velocities after each step; the records are resampled to
 * the output sampling at the end.
 */
export function simulateShot(model: ElasticModel, shot: ShotPositions, opts: SimulationOptions): SimulationResult {
  const setup = prepareSimulation(model, shot, opts);
  const { dt, steps, component } = setup;
  const src = sourceInjection(setup, shot.sourceX, shot.sourceZ);
  const stf = sourceTimeFunction(setup, opts.wavelet, src.atStress);
  const rec = receiverStencil(setup, shot.receiverX, shot.receiverZ);
  const nrec = shot.receiverX.length;
  const raw = new Float32Array(nrec * steps);

  // Snapshots.
  const snapTimes = opts.snapshotTimesS ?? [];
  const snapComponent = opts.snapshotComponent ?? component;
  if (snapTimes.length > 0) fieldOf(setup.layout, snapComponent);
  const snapSteps = snapTimes.map((t) => Math.min(steps - 1, Math.max(0, Math.round(t / dt - 0.5))));
  const frames = snapTimes.length > 0 ? new Float32Array(snapTimes.length * model.nx * model.nz) : undefined;
  const frameSize = model.nx * model.nz;

  const snapAt = new Uint8Array(steps);
  for (const n of snapSteps) snapAt[n] = 1;
  runShotSteps(
    setup,
    src,
    stf,
    rec,
    raw,
    frames
      ? {
          wants: (n) => snapAt[n] === 1,
          visit(n) {
            for (let q = 0; q < snapSteps.length; q++) if (snapSteps[q] === n) copyModelCells(setup, snapComponent, frames, q * frameSize);
          },
        }
      : undefined,
    opts.cancelFlag,
    opts.stepCounter,
  );
  if (opts.stepCounter) Atomics.store(opts.stepCounter, 0, steps);

  return {
    traces: resampleRecords(raw, nrec, steps, dt, setup.output),
    snapshots: frames ? { timesS: snapSteps.map((n) => (n + 0.5) * dt), frames, component: snapComponent } : undefined,
    dtS: dt,
    steps,
    pointsPerWavelength: setup.pointsPerWavelength,
  };
}

/**
 * Times `steps` time steps of the kernel on a homogeneous model of `nx` × `nz` cells (Vp 1500,
 * Vs 500 m/s, density 2000 kg/m³, 1 m spacing) with a Ricker force source injected every step,
 * after `warmupSteps` untimed steps (the WebAssembly engine optimises a function on a later call).
 * Returns the elapsed seconds of the timed steps.
 */
export function timeKernelSteps(opts: {
  mode: WaveMode;
  nx: number;
  nz: number;
  steps: number;
  pmlCells?: number;
  freeSurface?: boolean;
  warmupSteps?: number;
  kernel?: "wasm" | "reference";
}): { seconds: number; computationalCells: number } {
  const { mode, nx, nz, steps } = opts;
  if (!Number.isInteger(steps) || steps < 1) throw new RangeError(`steps must be an integer ≥ 1, got ${steps}`);
  const pmlCells = opts.pmlCells ?? 20;
  const freeSurface = opts.freeSurface ?? true;
  const model: ElasticModel = {
    kind: "model", nx, nz, spacingM: 1, originX: 0, originZ: 0,
    vp: new Float32Array(nx * nz).fill(1500), vs: new Float32Array(nx * nz).fill(500), rho: new Float32Array(nx * nz).fill(2000),
  };
  const { kernel, layout, mem } = createKernel(opts.kernel ?? "wasm", { mode, modelNx: nx, modelNz: nz, pmlCells, freeSurface });
  const vmax = mode === "psv" ? 1500 : 500;
  const dt = chooseTimeStep(1, vmax);
  const peak = 500 / (5 * 2.4);
  fillCoefficients(layout, mem, model, dt, vmax, peak, 1e-3);
  const field = mode === "psv" ? layout.offsets.f1 : layout.offsets.f0;
  const at = field + layout.org + (layout.rowOffset + 2) * layout.rowFloats + layout.colOffset + (nx >> 1);
  const warm = opts.warmupSteps ?? 20;
  let t0 = 0;
  for (let n = 0; n < warm + steps; n++) {
    if (n === warm) t0 = performance.now();
    mem[at] += 1e-3 * ricker(n * dt, peak, 1.2 / peak);
    kernel.step();
  }
  return { seconds: (performance.now() - t0) / 1000, computationalCells: layout.nx * layout.nrows };
}
