/**
 * The hidden "true" ground of the invented Quillmoor scenario (SCENARIO: topsoil and sandy clay
 * with Vs rising from about 140 m/s at the surface to about 320 m/s at 15 m, the water table at
 * 4 m, and an infilled hollow about 6 m wide and 3.5 m deep centred near x = 27 m), and a
 * synthesiser that makes the noise-free field waveforms with the finite-difference solver.
 *
 * Invented for the demo only: no test uses these values as a check.
 */
import FFT from "fft.js";
import { buildModel, type LayerDescription, type ShapeDescription } from "../../pipeline/kernels/fd/model-grid";
import { modelShots, type GatherTemplate } from "../../pipeline/kernels/fd/model-shots";
import type { ElasticModel, TraceHeader } from "../../pipeline/types";
import type { WorkerPool } from "../../pipeline/workers/pool";
import type { ShotLayout, ShotSynthesiser } from "./make-field-data";

/** The 1D background: the smooth gradient the starting model also uses. */
export const QUILLMOOR_LAYERS: LayerDescription[] = [
  { topM: 0, vp: 400, vs: 140, rho: 1700, vsGradient: 12, rhoGradient: 20 },
  { topM: 4, vp: 1600, vs: 188, rho: 1800, vsGradient: 12, rhoGradient: 13 },
];

/** The infilled solution hollow: a bowl of loose rubble and ash. */
export const QUILLMOOR_HOLLOW: ShapeDescription = {
  kind: "ellipse",
  centerXM: 27,
  centerZM: 0,
  radiusXM: 3,
  radiusZM: 3.5,
  vp: 250,
  vs: 90,
  rho: 1500,
};

/**
 * Cell size of the true model, m. Half the inversion's 0.25 m, so the field data are not modelled
 * on the grid the inversion uses (no "inverse crime", common practice in synthetic inversion
 * studies), and fine enough for the hammer pulse: at least 5 cells per shortest S wavelength
 * (Vs 90 m/s in the infill) up to the pulse's 5 % band edge.
 */
export const TRUE_MODEL_SPACING_M = 0.125;

/** Grid of the true model: the spread plus 8 m each side, 20 m deep, 0.125 m cells. */
export function quillmoorTrueModel(): ElasticModel {
  const spacingM = TRUE_MODEL_SPACING_M;
  const originX = -9;
  const widthM = 66;
  const depthM = 20;
  return buildModel(
    { originX, originZ: 0, spacingM, nx: Math.round(widthM / spacingM) + 1, nz: Math.round(depthM / spacingM) + 1 },
    QUILLMOOR_LAYERS,
    [QUILLMOOR_HOLLOW],
  );
}

/** Contact time of the sledgehammer on the plate, s (the force pulse's length). */
export const HAMMER_CONTACT_S = 0.014;

/**
 * The hammer's force on the plate: a causal sin² pulse of length {@link HAMMER_CONTACT_S},
 * starting at the trigger (t = 0) and never negative, as a blow pushes the plate down once.
 * Its amplitude spectrum is sinc(fT)/(1 − (fT)²) (a Hann window's transform): a fifth of the peak
 * at 100 Hz and 5 % near 127 Hz for T = 14 ms, so the records carry energy well above 100 Hz.
 * Sampled at `intervalS` from t = 0 to the end of the contact.
 */
export function hammerForcePulse(intervalS = 0.00005): Float32Array {
  const n = Math.ceil(HAMMER_CONTACT_S / intervalS) + 1;
  const out = new Float32Array(n);
  for (let k = 0; k < n; k++) {
    const t = k * intervalS;
    out[k] = t <= HAMMER_CONTACT_S ? Math.sin((Math.PI * t) / HAMMER_CONTACT_S) ** 2 : 0;
  }
  return out;
}

/** Apparent velocity used to turn the 2D (line-source) synthetics into point-source-like records, m/s. */
export const POINT_SOURCE_VELOCITY_MPS = 170;

/**
 * Turns line-source traces into point-source-like traces by inverting the single-velocity
 * transformation of Forbriger, Groos & Schäfer (2014): u_line = √(2 r v) · (u_point ∗ H(t)/√t),
 * i.e. in the frequency domain u_line = √(2 r v π) (iω)^(−1/2) u_point, so
 * u_point = (iω)^(1/2) u_line / √(2 r v π) (a half-order derivative, e^{−iωt} convention).
 * The 2D solver simulates a line source; a hammer is a point source, so the invented field
 * records get this conversion to behave like real ones. Distances below 0.5 m are taken as 0.5 m
 * (the plate sits beside the geophone). `data` is `[trace][sample]`, changed in place.
 */
export function lineToPointSource(data: Float32Array, distancesM: number[], sampleCount: number, sampleIntervalS: number, velocityMps: number): void {
  let size = 4;
  while (size < 2 * sampleCount) size *= 2;
  const fft = new FFT(size);
  const input = new Float64Array(size);
  const spectrum = fft.createComplexArray() as number[];
  const back = fft.createComplexArray() as number[];
  const c = Math.SQRT1_2; // cos(π/4) = sin(π/4)
  for (let t = 0; t < distancesM.length; t++) {
    input.fill(0);
    for (let k = 0; k < sampleCount; k++) input[k] = data[t * sampleCount + k];
    fft.realTransform(spectrum, input);
    fft.completeSpectrum(spectrum);
    const r = Math.max(0.5, Math.abs(distancesM[t]));
    const norm = 1 / Math.sqrt(2 * r * velocityMps * Math.PI);
    for (let k = 0; k < size; k++) {
      const signed = k <= size / 2 ? k : k - size;
      const w = (2 * Math.PI * signed) / (size * sampleIntervalS);
      const mag = Math.sqrt(Math.abs(w)) * norm;
      // (iω)^(1/2) = √|ω| e^{±iπ/4}
      const cr = mag * c;
      const ci = signed >= 0 ? mag * c : -mag * c;
      const re = spectrum[2 * k];
      const im = spectrum[2 * k + 1];
      spectrum[2 * k] = re * cr - im * ci;
      spectrum[2 * k + 1] = re * ci + im * cr;
    }
    fft.inverseTransform(back, spectrum);
    for (let k = 0; k < sampleCount; k++) data[t * sampleCount + k] = back[2 * k];
  }
}

/** Sampling of the hammer pulse handed to the solver, s. */
const PULSE_INTERVAL_S = 0.00005;

/**
 * Models every shot through the true model on the pool (vertical force, vertical geophones,
 * P-SV with a free surface) and returns a synthesiser that serves them. Amplitudes are scaled
 * by one factor for the whole survey so that the noise levels of the generator keep their meaning
 * (the strongest sample of the survey becomes 1).
 */
export async function solverSynthesiser(
  shots: ShotLayout[],
  pool: WorkerPool,
  onShot?: (done: number, total: number) => void,
): Promise<ShotSynthesiser> {
  const model = quillmoorTrueModel();
  const templates: GatherTemplate[] = shots.map((s) => ({
    id: `x${s.sourceX}`,
    sampleIntervalS: s.sampleIntervalS,
    sampleCount: s.sampleCount,
    startTimeS: s.startTimeS,
    traces: s.receiverX.map(
      (rx, i): TraceHeader => ({
        sourceFile: "",
        channel: i + 1,
        sourcePoint: 0,
        blow: 0,
        sourceX: s.sourceX,
        sourceZ: 0,
        receiverX: rx,
        receiverZ: 0,
        offset: rx - s.sourceX,
        stackCount: 1,
        component: "z",
        dead: false,
      }),
    ),
  }));
  const result = await modelShots(
    model,
    templates,
    { mode: "psv", sourceKind: "force-z", wavelet: { kind: "samples", samples: hammerForcePulse(PULSE_INTERVAL_S), intervalS: PULSE_INTERVAL_S, startTimeS: 0 }, component: "z", pmlCells: 20, freeSurface: true },
    { pool, onShot: (done, total) => onShot?.(done, total) },
  );
  for (const g of result.gathers) {
    lineToPointSource(
      g.data,
      g.traces.map((h) => h.receiverX - h.sourceX),
      g.sampleCount,
      g.sampleIntervalS,
      POINT_SOURCE_VELOCITY_MPS,
    );
  }
  let peak = 0;
  for (const g of result.gathers) for (const v of g.data) peak = Math.max(peak, Math.abs(v));
  const scale = peak > 0 ? 1 / peak : 1;
  const byX = new Map(result.gathers.map((g) => [g.traces[0].sourceX, g.data]));
  return (shot) => {
    const data = byX.get(shot.sourceX);
    if (!data) throw new RangeError(`no modelled shot at x = ${shot.sourceX} m`);
    return data.map((v) => v * scale);
  };
}
