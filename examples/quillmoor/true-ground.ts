/**
 * The hidden "true" ground of the invented Quillmoor scenario (SCENARIO: topsoil and sandy clay
 * with Vs rising from about 140 m/s at the surface to about 320 m/s at 15 m, the water table at
 * 4 m, and an infilled hollow about 6 m wide and 3.5 m deep centred near x = 27 m), and a
 * synthesiser that makes the noise-free field waveforms with the finite-difference solver.
 *
 * Invented for the demo only: no test uses these values as a check.
 */
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

/** Grid of the true model: the spread plus 8 m each side, 20 m deep, 0.25 m cells. */
export function quillmoorTrueModel(): ElasticModel {
  const spacingM = 0.25;
  const originX = -9;
  const widthM = 66;
  const depthM = 20;
  return buildModel(
    { originX, originZ: 0, spacingM, nx: Math.round(widthM / spacingM) + 1, nz: Math.round(depthM / spacingM) + 1 },
    QUILLMOOR_LAYERS,
    [QUILLMOOR_HOLLOW],
  );
}

/** Peak frequency of the Ricker wavelet standing in for the hammer, Hz. */
export const HAMMER_PEAK_HZ = 30;

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
    { mode: "psv", sourceKind: "force-z", wavelet: { kind: "ricker", peakHz: HAMMER_PEAK_HZ }, component: "z", pmlCells: 20, freeSurface: true },
    { pool, onShot: (done, total) => onShot?.(done, total) },
  );
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
