/**
 * First-arrival travel-time tomography: a regularised Gauss–Newton iteration on node slownesses.
 * Each outer iteration computes eikonal times from every source (./eikonal.ts), traces a ray per
 * pick back to its source (./rays.ts) for the sensitivity matrix G (ray length per node cell),
 * and solves by LSQR (./lsqr.ts) the weighted, regularised linearised problem for a relative
 * slowness update x (s_new = s·(1 + x)):
 *
 *   min ‖W·(G·S·x − r)‖² + ‖λ·D₂·(d + S'·x)‖² + damping²·‖x‖²,
 *
 * with r the observed minus modelled times, W = diag(1/σ) the pick uncertainties as data weights,
 * S = diag(s), d = s/s_start − 1 the model's departure from the starting model, S' = diag(s/s_start),
 * D₂ the second differences along x and z (smoothing: the roughness of the departure from the
 * starting model is penalised, so a smooth starting trend is kept where the data say nothing), and
 * λ = (smoothingM / h)². This is the usual damped and smoothed least-squares form of travel-time
 * tomography (Tikhonov regularisation with a second-difference roughening matrix, e.g. Aster,
 * Borchers & Thurber, Parameter Estimation and Inverse Problems, from memory; Paige & Saunders
 * 1982 for LSQR's damping). Velocities
 * are clipped to the bounds after each update.
 *
 * Layout: node grids `[z][x]`, positions in metres from the grid origin, z positive down.
 */
import { eikonalTimes, interpolateNodes, type EikonalOptions, type TravelTimeGrid } from "./eikonal";
import { prepareRayWorkspace, traceRay, type RayWorkspace } from "./rays";
import { lsqr, SparseRowBuilder } from "./lsqr";

/** Observed first-arrival times and their geometry. */
export interface TravelTimeData {
  /** Source positions, m from the grid origin, interleaved x, z per source. */
  sources: Float64Array;
  /** Source number (index into `sources`) of each pick. */
  pickSource: Int32Array;
  /** Receiver x of each pick, m from the grid origin. */
  receiverX: Float64Array;
  /** Receiver depth of each pick, m from the grid origin. */
  receiverZ: Float64Array;
  /** Observed first-arrival time of each pick, s. */
  timeS: Float64Array;
  /** Uncertainty (one standard deviation) of each pick, s. */
  sigmaS: Float64Array;
}

/** Settings of {@link travelTimeTomography}. */
export interface TomographySettings {
  /** Outer (re-traced) iterations. */
  iterations: number;
  /** Smoothing length, m: weight (smoothingM/h)² on second differences of the departure from the start. */
  smoothingM: number;
  /** Damping of the relative slowness update (dimensionless, LSQR's damp). */
  damping: number;
  /** Lowest velocity allowed, m/s. */
  minVelocity: number;
  /** Highest velocity allowed, m/s. */
  maxVelocity: number;
  /** Largest relative slowness change per iteration (e.g. 0.3). @default 0.3 */
  maxRelativeStep?: number;
  /** LSQR iteration limit per update. @default 200 */
  lsqrIterations?: number;
  /** Eikonal solver settings. */
  eikonal?: EikonalOptions;
  /** Called after each forward computation (iteration index, rms s); may throw to stop (cancel). */
  onIteration?: (iteration: number, rmsS: number) => void;
}

/** One row of the iteration history. */
export interface TomographyIteration {
  /** 0 for the starting model, then one per update. */
  iteration: number;
  /** Root-mean-square travel-time residual (observed − modelled), s. */
  rmsS: number;
  /** Root-mean-square residual in units of the pick uncertainties (1 = fits to the stated errors). */
  weightedRms: number;
  /** LSQR iterations of the update that followed (0 for the last row). */
  lsqrIterations: number;
}

/** Outcome of {@link travelTimeTomography}. */
export interface TomographyResult {
  /** Final velocity, m/s, `[z][x]`. */
  velocity: Float64Array;
  /** Ray length per node cell in the final model, m, `[z][x]`. */
  coverageM: Float64Array;
  /** Number of rays that touch each node cell in the final model, `[z][x]`. */
  rayCount: Int32Array;
  /** Modelled times of each pick through the starting model, s. */
  startingModelledS: Float64Array;
  /** Modelled times of each pick through the final model, s. */
  modelledS: Float64Array;
  /** Iteration history: the starting model, then each update. */
  history: TomographyIteration[];
  /** Final rays, x z pairs per point, all rays concatenated; ray i spans points rayStart[i] … rayStart[i+1]−1. */
  rayPoints: Float64Array;
  rayStart: Int32Array;
  /** Picks whose ray descent did not reach the source in the final model. */
  unreachedRays: number;
}

function checkData(data: TravelTimeData, grid: TravelTimeGrid): void {
  const n = data.pickSource.length;
  for (const [name, arr] of [["receiverX", data.receiverX], ["receiverZ", data.receiverZ], ["timeS", data.timeS], ["sigmaS", data.sigmaS]] as const) {
    if (arr.length !== n) throw new RangeError(`${name} must have one value per pick (${n}), got ${arr.length}`);
  }
  if (data.sources.length % 2 !== 0) throw new RangeError(`sources must hold x, z pairs, got ${data.sources.length} values`);
  const ns = data.sources.length / 2;
  const xMax = (grid.nx - 1) * grid.spacingM;
  const zMax = (grid.nz - 1) * grid.spacingM;
  for (let i = 0; i < n; i++) {
    if (!(data.pickSource[i] >= 0 && data.pickSource[i] < ns)) throw new RangeError(`pickSource[${i}] must be in 0 … ${ns - 1}, got ${data.pickSource[i]}`);
    if (!(data.sigmaS[i] > 0)) throw new RangeError(`sigmaS[${i}] must be positive, got ${data.sigmaS[i]}`);
    if (!Number.isFinite(data.timeS[i])) throw new RangeError(`timeS[${i}] must be finite, got ${data.timeS[i]}`);
    if (!(data.receiverX[i] >= 0 && data.receiverX[i] <= xMax)) throw new RangeError(`receiverX[${i}] must lie on the grid (0 … ${xMax} m), got ${data.receiverX[i]}`);
    if (!(data.receiverZ[i] >= 0 && data.receiverZ[i] <= zMax)) throw new RangeError(`receiverZ[${i}] must lie on the grid (0 … ${zMax} m), got ${data.receiverZ[i]}`);
  }
}

/** Modelled times of every pick (and, when `workspaces` is given, the time fields' gradients per source). */
function forward(
  slowness: Float64Array,
  grid: TravelTimeGrid,
  data: TravelTimeData,
  eikonal: EikonalOptions | undefined,
  modelled: Float64Array,
  keep?: (source: number, times: Float64Array) => void,
): void {
  const ns = data.sources.length / 2;
  const times = new Float64Array(grid.nx * grid.nz);
  const bySource: number[][] = Array.from({ length: ns }, () => []);
  for (let i = 0; i < data.pickSource.length; i++) bySource[data.pickSource[i]].push(i);
  for (let src = 0; src < ns; src++) {
    if (bySource[src].length === 0) continue;
    eikonalTimes(slowness, grid, data.sources[2 * src], data.sources[2 * src + 1], eikonal, times);
    for (const i of bySource[src]) modelled[i] = interpolateNodes(times, grid, data.receiverX[i], data.receiverZ[i]);
    keep?.(src, times);
  }
}

function rmsOf(data: TravelTimeData, modelled: Float64Array): { rms: number; weighted: number } {
  let s = 0;
  let sw = 0;
  const n = modelled.length;
  for (let i = 0; i < n; i++) {
    const r = data.timeS[i] - modelled[i];
    s += r * r;
    sw += (r / data.sigmaS[i]) ** 2;
  }
  return { rms: Math.sqrt(s / Math.max(1, n)), weighted: Math.sqrt(sw / Math.max(1, n)) };
}

/** Rays of every pick through the current model: sensitivity rows and (optionally) paths. */
function traceAll(
  slowness: Float64Array,
  grid: TravelTimeGrid,
  data: TravelTimeData,
  eikonal: EikonalOptions | undefined,
  modelled: Float64Array,
  onRay: (pick: number, nodes: Int32Array, lengths: Float64Array, path: Float64Array, reached: boolean) => void,
): void {
  const ns = data.sources.length / 2;
  const bySource: number[][] = Array.from({ length: ns }, () => []);
  for (let i = 0; i < data.pickSource.length; i++) bySource[data.pickSource[i]].push(i);
  let ws: RayWorkspace | undefined;
  forward(slowness, grid, data, eikonal, modelled, (src, times) => {
    ws = prepareRayWorkspace(times, grid, ws);
    for (const i of bySource[src]) {
      const ray = traceRay(ws, grid, data.sources[2 * src], data.sources[2 * src + 1], data.receiverX[i], data.receiverZ[i]);
      onRay(i, ray.nodes, ray.lengthsM, ray.path, ray.reached);
    }
  });
}

/**
 * Inverts first-arrival times for node velocities from `startVelocity` (m/s, `[z][x]`). Returns the
 * final model, its ray coverage and the residual history.
 */
export function travelTimeTomography(
  grid: TravelTimeGrid,
  data: TravelTimeData,
  startVelocity: ArrayLike<number>,
  settings: TomographySettings,
): TomographyResult {
  const { nx, nz, spacingM: h } = grid;
  const n = nx * nz;
  if (startVelocity.length !== n) throw new RangeError(`startVelocity must have nx·nz = ${n} values, got ${startVelocity.length}`);
  checkData(data, grid);
  const { iterations, smoothingM, damping, minVelocity, maxVelocity } = settings;
  if (!Number.isInteger(iterations) || iterations < 0) throw new RangeError(`iterations must be a non-negative integer, got ${iterations}`);
  if (!(smoothingM >= 0)) throw new RangeError(`smoothingM must be ≥ 0, got ${smoothingM}`);
  if (!(damping >= 0)) throw new RangeError(`damping must be ≥ 0, got ${damping}`);
  if (!(minVelocity > 0 && maxVelocity > minVelocity)) throw new RangeError(`need 0 < minVelocity < maxVelocity, got ${minVelocity} and ${maxVelocity}`);
  const maxStep = settings.maxRelativeStep ?? 0.3;
  if (!(maxStep > 0)) throw new RangeError(`maxRelativeStep must be positive, got ${maxStep}`);
  const lsqrIterations = settings.lsqrIterations ?? 200;

  const sStart = new Float64Array(n);
  for (let k = 0; k < n; k++) {
    const v = startVelocity[k];
    if (!(v > 0) || !Number.isFinite(v)) throw new RangeError(`startVelocity[${k}] must be positive and finite, got ${v}`);
    sStart[k] = 1 / Math.min(Math.max(v, minVelocity), maxVelocity);
  }
  const s = Float64Array.from(sStart);
  const picks = data.pickSource.length;
  const modelled = new Float64Array(picks);
  const startingModelled = new Float64Array(picks);
  const history: TomographyIteration[] = [];
  const lambda = (smoothingM / h) ** 2;

  for (let it = 0; ; it++) {
    const builder = new SparseRowBuilder(n);
    const rhs: number[] = [];
    const last = it === iterations;
    if (last) forward(s, grid, data, settings.eikonal, modelled);
    else {
      const rowsByPick: Array<[Int32Array, Float64Array]> = new Array(picks);
      traceAll(s, grid, data, settings.eikonal, modelled, (i, nodes, lengths) => {
        rowsByPick[i] = [nodes, lengths];
      });
      for (let i = 0; i < picks; i++) {
        const [nodes, lengths] = rowsByPick[i];
        const w = 1 / data.sigmaS[i];
        const vals = new Float64Array(nodes.length);
        for (let j = 0; j < nodes.length; j++) vals[j] = w * lengths[j] * s[nodes[j]];
        builder.addRow(nodes, vals);
        rhs.push(w * (data.timeS[i] - modelled[i]));
      }
    }
    if (it === 0) startingModelled.set(modelled);
    const { rms, weighted } = rmsOf(data, modelled);
    settings.onIteration?.(it, rms);
    if (last) {
      history.push({ iteration: it, rmsS: rms, weightedRms: weighted, lsqrIterations: 0 });
      break;
    }
    if (lambda > 0) {
      // Second differences of the departure from the start along x and z at interior nodes.
      const addSecondDifference = (k0: number, k1: number, k2: number) => {
        const cols = [k0, k1, k2];
        const coef = [1, -2, 1];
        let departure = 0;
        const vals = new Float64Array(3);
        for (let j = 0; j < 3; j++) {
          const k = cols[j];
          departure += coef[j] * (s[k] / sStart[k] - 1);
          vals[j] = lambda * coef[j] * (s[k] / sStart[k]);
        }
        builder.addRow(cols, vals);
        rhs.push(-lambda * departure);
      };
      for (let iz = 0; iz < nz; iz++) {
        for (let ix = 0; ix < nx; ix++) {
          const k = iz * nx + ix;
          if (ix > 0 && ix < nx - 1) addSecondDifference(k - 1, k, k + 1);
          if (iz > 0 && iz < nz - 1) addSecondDifference(k - nx, k, k + nx);
        }
      }
    }
    const solution = lsqr(builder.build(), Float64Array.from(rhs), { damp: damping, maxIterations: lsqrIterations, atol: 1e-6, btol: 1e-6 });
    history.push({ iteration: it, rmsS: rms, weightedRms: weighted, lsqrIterations: solution.iterations });
    for (let k = 0; k < n; k++) {
      const x = Math.min(Math.max(solution.x[k], -maxStep), maxStep);
      const v = 1 / (s[k] * (1 + x));
      s[k] = 1 / Math.min(Math.max(v, minVelocity), maxVelocity);
    }
  }

  // Coverage and rays through the final model.
  const coverageM = new Float64Array(n);
  const rayCount = new Int32Array(n);
  const points: Float64Array[] = [];
  const starts = new Int32Array(picks + 1);
  let unreached = 0;
  const finalModelled = new Float64Array(picks);
  traceAll(s, grid, data, settings.eikonal, finalModelled, (i, nodes, lengths, path, reached) => {
    for (let j = 0; j < nodes.length; j++) {
      coverageM[nodes[j]] += lengths[j];
      rayCount[nodes[j]]++;
    }
    points[i] = path;
    if (!reached) unreached++;
  });
  let total = 0;
  for (let i = 0; i < picks; i++) {
    starts[i] = total;
    total += points[i].length / 2;
  }
  starts[picks] = total;
  const rayPoints = new Float64Array(2 * total);
  for (let i = 0; i < picks; i++) rayPoints.set(points[i], 2 * starts[i]);
  const velocity = new Float64Array(n);
  for (let k = 0; k < n; k++) velocity[k] = 1 / s[k];
  return { velocity, coverageM, rayCount, startingModelledS: startingModelled, modelledS: modelled, history, rayPoints, rayStart: starts, unreachedRays: unreached };
}

/**
 * Depth the rays reach per column: the depth (m from the grid origin) of the deepest node whose
 * ray coverage is at least `thresholdM`, NaN for a column with none.
 */
export function rayReachDepth(coverageM: ArrayLike<number>, grid: TravelTimeGrid, thresholdM: number): Float64Array {
  const { nx, nz, spacingM: h } = grid;
  if (coverageM.length !== nx * nz) throw new RangeError(`coverageM must have nx·nz = ${nx * nz} values, got ${coverageM.length}`);
  if (!(thresholdM > 0)) throw new RangeError(`thresholdM must be positive, got ${thresholdM}`);
  const out = new Float64Array(nx).fill(NaN);
  for (let ix = 0; ix < nx; ix++) {
    for (let iz = nz - 1; iz >= 0; iz--) {
      if (coverageM[iz * nx + ix] >= thresholdM) {
        out[ix] = iz * h;
        break;
      }
    }
  }
  return out;
}
