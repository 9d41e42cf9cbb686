/**
 * Checks made before any time step: physical cells, stability and accuracy. Each refusal says
 * which value to change and to what.
 */
import { FdSetupError } from "./errors";
import type { ElasticModel } from "../../types";

/**
 * Courant limit of the fourth-order staggered scheme in 2D:
 * dt ≤ h / (√2 · vmax · (9/8 + 1/24)) ≈ 0.606 · h / vmax (Levander 1988).
 */
export const STABILITY_FACTOR = 1 / (Math.SQRT2 * (9 / 8 + 1 / 24));

/** Largest stable time step, s, for spacing `spacingM` and fastest velocity `vmax` (m/s). */
export function maxStableDt(spacingM: number, vmax: number): number {
  if (!(spacingM > 0)) throw new RangeError(`spacingM must be > 0, got ${spacingM}`);
  if (!(vmax > 0)) throw new RangeError(`vmax must be > 0, got ${vmax}`);
  return (STABILITY_FACTOR * spacingM) / vmax;
}

/** Fraction of the stability limit used when the time step is chosen automatically. */
export const AUTO_DT_FRACTION = 0.9;

/**
 * The time step: `requested` if given and stable (else an FdSetupError naming `dtS`), otherwise
 * 0.9 of the limit, shortened so that `outputIntervalS` (if given) is a whole number of steps.
 */
export function chooseTimeStep(spacingM: number, vmax: number, requested?: number, outputIntervalS?: number): number {
  const limit = maxStableDt(spacingM, vmax);
  if (requested !== undefined) {
    if (!(requested > 0)) throw new FdSetupError(`dtS must be > 0, got ${requested}.`, "dtS");
    if (requested > limit) {
      throw new FdSetupError(
        `Time step dtS = ${fmt(requested)} s is unstable for grid spacing ${fmt(spacingM)} m and fastest velocity ${fmt(vmax)} m/s: ` +
          `set dtS to at most ${fmt(limit)} s (0.606·dx/vmax, Levander 1988) or leave it out to choose it automatically.`,
        "dtS",
      );
    }
    return requested;
  }
  let dt = AUTO_DT_FRACTION * limit;
  if (outputIntervalS !== undefined && outputIntervalS > 0) dt = outputIntervalS / Math.ceil(outputIntervalS / dt);
  return dt;
}

/**
 * Accuracy: grid points per shortest shear wavelength vsMin / (maxHz · h) must reach `minPoints`
 * (common practice: 5 to 8 for this fourth-order scheme).
 */
export function checkGridAccuracy(spacingM: number, vsMin: number, maxHz: number, minPoints: number): number {
  const points = vsMin / (maxHz * spacingM);
  if (points < minPoints) {
    const hMax = vsMin / (maxHz * minPoints);
    const fMax = vsMin / (spacingM * minPoints);
    throw new FdSetupError(
      `Grid too coarse: spacing ${fmt(spacingM)} m gives ${points.toFixed(2)} points per shortest S wavelength ` +
        `(Vs ${fmt(vsMin)} m/s at ${fmt(maxHz)} Hz, the highest frequency of the wavelet), fewer than ${minPoints}. ` +
        `Set spacingM to at most ${fmt(hMax)} m, or lower the wavelet's highest frequency to ${fmt(fMax)} Hz ` +
        `(Ricker peak about ${fmt(fMax / 2.4)} Hz), or lower minPointsPerWavelength.`,
      "spacingM",
    );
  }
  return points;
}

/** Where a cell is, for messages. */
function cellName(m: ElasticModel, ix: number, iz: number): string {
  return `cell (column ${ix}, row ${iz}) at x = ${fmt(m.originX + ix * m.spacingM)} m, z = ${fmt(m.originZ + iz * m.spacingM)} m`;
}

/**
 * Refuses unphysical cells: Vs ≤ 0, Vp/Vs ≤ √2 (λ = ρ(Vp² − 2Vs²) must stay positive) and
 * density ≤ 0, naming the first bad cell. Returns the extreme values.
 */
export function checkModelCells(m: ElasticModel): { vpMax: number; vsMin: number; vsMax: number } {
  const n = m.nx * m.nz;
  for (const [k, a] of [["vp", m.vp], ["vs", m.vs], ["rho", m.rho]] as const) {
    if (a.length !== n) throw new FdSetupError(`model ${k} has ${a.length} values, expected nx·nz = ${n}.`, k);
  }
  let vpMax = 0;
  let vsMin = Infinity;
  let vsMax = 0;
  for (let k = 0; k < n; k++) {
    const vp = m.vp[k];
    const vs = m.vs[k];
    const rho = m.rho[k];
    const ix = k % m.nx;
    const iz = (k - ix) / m.nx;
    if (!(vs > 0)) throw new FdSetupError(`Vs = ${vs} m/s at ${cellName(m, ix, iz)}: Vs must be > 0.`, "vs");
    if (!(vp > Math.SQRT2 * vs)) {
      throw new FdSetupError(
        `Vp/Vs = ${fmt(vp / vs)} (Vp ${fmt(vp)} m/s, Vs ${fmt(vs)} m/s) at ${cellName(m, ix, iz)}: Vp/Vs must exceed √2 ≈ 1.414.`,
        "vp",
      );
    }
    if (!(rho > 0)) throw new FdSetupError(`density = ${rho} kg/m³ at ${cellName(m, ix, iz)}: density must be > 0.`, "rho");
    if (vp > vpMax) vpMax = vp;
    if (vs < vsMin) vsMin = vs;
    if (vs > vsMax) vsMax = vs;
  }
  return { vpMax, vsMin, vsMax };
}

function fmt(x: number): string {
  return Number(x.toPrecision(4)).toString();
}
