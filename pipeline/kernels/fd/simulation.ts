/**
 * Runs one shot through an elastic model: sets up the staggered material coefficients and the
 * absorbing boundary, steps the WebAssembly (or reference) kernel, injects the source, records
 * receivers and snapshots, and resamples the traces to the requested output sampling.
 */
import type { ElasticModel } from "../../types";
import { StepInputError } from "../../step";
import { checkGridAccuracy, checkModelCells, chooseTimeStep } from "./checks";
import { planLayout, type FdLayout, type WaveMode } from "./layout";
import { FLUSH_BELOW, createReferenceKernel, type FdKernel } from "./reference-kernel";
import { resampleBandLimited } from "./resample";
import { ricker, sampleWavelet, waveletBand, type SourceWavelet } from "./wavelet";
import { createWasmKernel } from "./wasm-kernel";

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

/** Float offset of a particle-velocity component's array. */
function fieldOf(layout: FdLayout, component: VelocityComponent): number {
  const o = layout.offsets;
  if (layout.mode === "sh") {
    if (component !== "y") throw new StepInputError(`SH records only the y component, got "${component}".`, "component");
    return o.f0;
  }
  switch (component) {
    case "x":
      return o.f0;
    case "z":
      return o.f1;
    default:
      throw new StepInputError(`P-SV records the x or z component, got "${component}".`, "component");
  }
}

/** Bilinear weights of a point onto its component's grid (comp coordinates), rows clamped at a free surface. */
function pointStencil(layout: FdLayout, col: number, row: number, component: VelocityComponent | "stress") {
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
    throw new StepInputError(
      `${what} at x = ${x} m, z = ${z} m lies outside the model (x ${model.originX} to ${xMax} m, z ${model.originZ} to ${zMax} m): extend the model or move it.`,
      field,
    );
  }
}

/** Allocates and binds a kernel for a model grid. */
export function createKernel(
  kind: "wasm" | "reference",
  opts: { mode: WaveMode; modelNx: number; modelNz: number; pmlCells: number; freeSurface: boolean },
): { kernel: FdKernel; layout: FdLayout; mem: Float32Array } {
  if (kind === "wasm") return createWasmKernel(opts);
  const layout = planLayout(opts);
  const mem = new Float32Array(layout.totalBytes / 4);
  return { kernel: createReferenceKernel(layout, mem), layout, mem };
}

/**
 * The checks {@link simulateShot} makes before any time step, and the values they settle:
 * unphysical cells, accuracy (points per shortest S wavelength), stability (time step), source and
 * receivers inside the model. Throws StepInputError naming the value to change.
 */
export function checkSimulation(model: ElasticModel, shot: ShotPositions, opts: SimulationOptions) {
  const mode = opts.mode;
  if (mode !== "psv" && mode !== "sh") throw new RangeError(`mode must be "psv" or "sh", got ${String(mode)}`);
  const component = opts.component ?? (mode === "psv" ? "z" : "y");
  const sourceKind = opts.sourceKind;
  if (mode === "sh" && sourceKind !== "force-y") throw new StepInputError(`SH needs sourceKind "force-y", got "${sourceKind}".`, "sourceKind");
  if (mode === "psv" && sourceKind === "force-y") throw new StepInputError(`P-SV takes "force-z", "force-x" or "explosive", got "force-y".`, "sourceKind");
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
    throw new StepInputError(`The model has ${model.nx} × ${model.nz} cells; the solver needs at least 8 × 8: refine or enlarge the grid.`, "model");
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

/**
 * Models one shot. Refuses unphysical cells, unstable time steps and too coarse grids before
 * any time step (StepInputError naming the value to change).
 */
export function simulateShot(model: ElasticModel, shot: ShotPositions, opts: SimulationOptions): SimulationResult {
  const { mode, component, sourceKind, pmlCells, freeSurface, intervalS, count, startTimeS, nrec, band, h, points, vmax, dt } =
    checkSimulation(model, shot, opts);

  const { kernel, layout, mem } = createKernel(opts.kernel ?? "wasm", {
    mode, modelNx: model.nx, modelNz: model.nz, pmlCells, freeSurface,
  });
  const smoothing = opts.pmlSmoothingCells ?? 0;
  if (!Number.isInteger(smoothing) || smoothing < 0) throw new RangeError(`pmlSmoothingCells must be an integer ≥ 0, got ${smoothing}`);
  fillCoefficients(layout, mem, model, dt, vmax, band.peakHz > 0 ? band.peakHz : 1 / (10 * dt), opts.pmlReflection ?? 1e-3, smoothing);

  const toCol = (x: number) => layout.colOffset + (x - model.originX) / h;
  const toRow = (z: number) => layout.rowOffset + (z - model.originZ) / h;

  // Time axis: velocities after step n belong to t = (n + ½) dt.
  const tEnd = startTimeS + (count - 1) * intervalS + 8 * Math.max(intervalS, dt);
  const steps = Math.max(1, Math.ceil(tEnd / dt + 0.5));

  // Source: force on a velocity component (impulse dt·F/(ρ h²) per step, ρ from the buoyancy
  // array, which holds dt/(ρ h)), or explosive on σxx and σzz (−dt·S/h², outward motion for S > 0).
  const sc = toCol(shot.sourceX);
  const sr = toRow(shot.sourceZ);
  const src: Array<{ index: number; scale: number; mirror: number }> = [];
  let sourceAtStress = false;
  if (sourceKind === "explosive") {
    sourceAtStress = true;
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
  const stf = sampleWavelet(opts.wavelet, sourceAtStress ? 0.5 * dt : 0, dt, steps);

  // Receivers.
  const recField = fieldOf(layout, component);
  const recIdx: number[] = [];
  const recW: number[] = [];
  const recStart = new Int32Array(nrec + 1);
  for (let r = 0; r < nrec; r++) {
    recStart[r] = recIdx.length;
    for (const p of pointStencil(layout, toCol(shot.receiverX[r]), toRow(shot.receiverZ[r]), component)) {
      recIdx.push(recField + p.index);
      recW.push(p.weight);
    }
  }
  recStart[nrec] = recIdx.length;
  const raw = new Float32Array(nrec * steps);

  // Snapshots.
  const snapTimes = opts.snapshotTimesS ?? [];
  const snapComponent = opts.snapshotComponent ?? component;
  const snapField = snapTimes.length > 0 ? fieldOf(layout, snapComponent) : 0;
  const snapSteps = snapTimes.map((t) => Math.min(steps - 1, Math.max(0, Math.round(t / dt - 0.5))));
  const frames = snapTimes.length > 0 ? new Float32Array(snapTimes.length * model.nx * model.nz) : undefined;

  const cancel = opts.cancelFlag;
  for (let n = 0; n < steps; n++) {
    if (cancel && (n & 63) === 0 && Atomics.load(cancel, 0) !== 0) {
      const err = new Error("cancelled");
      err.name = "AbortError";
      throw err;
    }
    // Sources enter between steps: a force adds its impulse dt·F(t_n)/(ρh²) to the velocities
    // before step n updates them; an explosive source adds to the stresses of step n−1, at
    // (n − ½)·dt, before step n reads them.
    if (!sourceAtStress) {
      const v = stf[n];
      for (const s of src) mem[s.index] = flushToZero(f32(mem[s.index] + f32(s.scale * v)));
    } else if (n > 0) {
      const v = stf[n - 1];
      for (const s of src) {
        mem[s.index] = flushToZero(f32(mem[s.index] + f32(s.scale * v)));
        if (s.mirror >= 0) mem[s.mirror] = -mem[s.index];
      }
    }
    kernel.step();
    for (let r = 0; r < nrec; r++) {
      let acc = 0;
      for (let k = recStart[r]; k < recStart[r + 1]; k++) acc += mem[recIdx[k]] * recW[k];
      raw[r * steps + n] = acc;
    }
    if (frames) {
      for (let q = 0; q < snapSteps.length; q++) {
        if (snapSteps[q] !== n) continue;
        for (let iz = 0; iz < model.nz; iz++) {
          const from = snapField + layout.org + (iz + layout.rowOffset) * layout.rowFloats + layout.colOffset;
          frames.set(mem.subarray(from, from + model.nx), (q * model.nz + iz) * model.nx);
        }
      }
    }
  }

  const traces = new Float32Array(nrec * count);
  for (let r = 0; r < nrec; r++) {
    resampleBandLimited(raw, 0.5 * dt, dt, startTimeS, intervalS, count, traces, r * count, r * steps, steps);
  }
  return {
    traces,
    snapshots: frames ? { timesS: snapSteps.map((n) => (n + 0.5) * dt), frames, component: snapComponent } : undefined,
    dtS: dt,
    steps,
    pointsPerWavelength: points,
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
