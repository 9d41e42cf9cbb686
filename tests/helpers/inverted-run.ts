/**
 * A small finished waveform-inversion run for tests of what is made from it (the client report):
 * synthetic SH shots over a slow block (a test step standing in for the field data), a uniform
 * starting model, and the real waveform-inversion step through the real runner.
 */
import fs from "node:fs";
import path from "node:path";
import { z } from "zod";
import type { Db } from "../../db/client";
import { createRun, executeRun } from "../../pipeline/runner";
import { listSteps, registerStep } from "../../pipeline/registry";
import { defineStep } from "../../pipeline/step";
import { buildModel, paintShapes } from "../../pipeline/kernels/fd/model-grid";
import { simulateShot } from "../../pipeline/kernels/fd/simulation";
import type { Gather, GatherSet } from "../../pipeline/types";

export const FIXTURE_SPACING_M = 0.25;
export const FIXTURE_GRID = { originX: 0, originZ: 0, spacingM: FIXTURE_SPACING_M, nx: 65, nz: 25 };
/** The true ground: Vs 200 m/s with a 160 m/s block from 7 to 10 m along the profile, 1 to 3 m deep. */
const truth = paintShapes(buildModel(FIXTURE_GRID, [{ topM: 0, vp: 400, vs: 200, rho: 1800 }]), [
  { kind: "rectangle" as const, x0M: 7, x1M: 10, z0M: 1, z1M: 3, vp: 400, vs: 160, rho: 1800 },
]);
const sources = [1.5, 8, 14.5];
const receiverX = Array.from({ length: 16 }, (_, k) => 0.5 + k);
const output = { intervalS: 0.0005, count: 240, startTimeS: 0 };

/** Synthetic SH shot records over the true ground: the "field data" of the fixture. */
export const shShotsStep = defineStep({
  id: "test-sh-shots",
  version: 1,
  title: "synthetic SH shots over a slow block",
  description: "test step",
  reads: [],
  writes: ["gathers"],
  params: z.object({ peakHz: z.number().default(30).describe("Ricker peak frequency, Hz") }),
  async run(_input, p) {
    const gathers: Gather[] = sources.map((sx, s) => {
      const shot = { sourceX: sx, sourceZ: 0, receiverX, receiverZ: receiverX.map(() => 0) };
      const r = simulateShot(truth, shot, { mode: "sh", sourceKind: "force-y", component: "y", wavelet: { kind: "ricker", peakHz: p.peakHz }, pmlCells: 10, output });
      return {
        id: `SP${s + 1}`,
        sampleIntervalS: output.intervalS,
        sampleCount: output.count,
        startTimeS: 0,
        traces: receiverX.map((rx, c) => ({
          sourceFile: `sp${s + 1}.dat`, channel: c + 1, sourcePoint: s + 1, blow: 1, sourceX: sx, sourceZ: 0,
          receiverX: rx, receiverZ: 0, offset: rx - sx, stackCount: 1, component: "y" as const, dead: false,
        })),
        data: r.traces,
      };
    });
    const set: GatherSet = { kind: "gathers", gathers };
    return { outputs: { gathers: set } };
  },
});

/**
 * Writes the fixture pipeline into `dir` and runs it to the end (survey "brackenfold", profile
 * BF-2); `iterations` per stage, one stage per entry of `lowPassHz`. Answers the run id.
 */
export async function runInversionFixture(db: Db, dir: string, o: { lowPassHz?: number[]; iterations?: number } = {}): Promise<number> {
  if (!listSteps().some((s) => s.id === shShotsStep.id)) registerStep(shShotsStep);
  const stages = (o.lowPassHz ?? [40, 60])
    .map((hz) => `        - { lowPassHz: ${hz}, measure: least-squares, iterations: ${o.iterations ?? 2}, stopBelowRelativeChange: 0, reestimateWavelet: false }`)
    .join("\n");
  const file = path.join(dir, "inversion-fixture.yaml");
  fs.writeFileSync(
    file,
    `name: inversion-fixture
survey: brackenfold
profile: BF-2
steps:
  - step: test-sh-shots
  - step: build-model
    settings:
      grid: { originXM: 0, spacingM: ${FIXTURE_SPACING_M}, nx: ${FIXTURE_GRID.nx}, nz: ${FIXTURE_GRID.nz} }
      layers: [{ topM: 0, vp: 400, vs: 200, rho: 1800 }]
  - step: waveform-inversion
    settings:
      mode: sh
      pmlCells: 10
      waveletFrom: ricker
      rickerPeakHz: 30
      fixedOutsideSpread: false
      smoothingM: 0.25
      sourceTaperM: 1
      receiverTaperM: 0
      firstStepFraction: 0.05
      stages:
${stages}
`,
  );
  const { runId } = createRun(db, { source: "pipeline-file", pipelinePath: file, actor: { userId: null, label: "field processor", door: "cli" } });
  const outcome = await executeRun(db, runId);
  if ((outcome as { status?: string }).status !== "succeeded") throw new Error(`the inversion fixture ended ${JSON.stringify(outcome)}`);
  return runId;
}
