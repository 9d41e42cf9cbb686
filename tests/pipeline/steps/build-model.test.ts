/**
 * Step build-model: models from descriptions, errors that name the pipeline-file line, CSV import
 * and grid sizing from the spread.
 */
import { describe, expect, it } from "vitest";
import { buildModelStep } from "../../../pipeline/steps/build-model";
import { parsePipelineText } from "../../../pipeline/pipeline-file";
import { makeStepContext } from "../../helpers/step-context";
import { makeGather } from "./make-gather";

const parse = (p: unknown) => buildModelStep.params.parse(p);

function pipelineText(settings: string): string {
  return [
    "name: modelling-study",
    "survey: study",
    "steps:",
    "  - step: build-model",
    "    settings:",
    settings
      .split("\n")
      .map((l) => `      ${l}`)
      .join("\n"),
  ].join("\n");
}

/** The 1-based line of the first line in `text` containing `needle`. */
const lineOf = (text: string, needle: string, from = 0) => text.split("\n").findIndex((l, i) => i >= from && l.includes(needle)) + 1;

describe("build-model settings", () => {
  const good = [
    "grid: { spacingM: 0.5, widthM: 40, depthM: 15 }",
    "layers:",
    "  - { topM: 0, vp: 400, vs: 140, rho: 1700, vsGradient: 12 }",
    "  - { topM: 4, vp: 1600, vs: 190, rho: 1900 }",
    "shapes:",
    "  - kind: ellipse",
    "    centerXM: 27",
    "    centerZM: 0",
    "    radiusXM: 3",
    "    radiusZM: 3.5",
    "    vs: 90",
    "    vp: 250",
    "    rho: 1500",
    "  - kind: rectangle",
    "    x0M: 5",
    "    x1M: 6",
    "    z0M: 2",
    "    z1M: 3",
    "    vs: 300",
    "    vp: 700",
  ].join("\n");

  it("accepts a layered model with shapes in a pipeline file", () => {
    expect(() => parsePipelineText(pipelineText(good), "study.yaml", "/tmp")).not.toThrow();
  });

  it("names the line of a negative velocity in a shape", () => {
    const text = pipelineText(good.replace("    vs: 300", "    vs: -300"));
    const line = lineOf(text, "vs: -300");
    expect(() => parsePipelineText(text, "study.yaml", "/tmp")).toThrow(new RegExp(`study\\.yaml line ${line}, .*shapes.*vs.*must be > 0, got -300`));
  });

  it("names the line of a shape outside the grid", () => {
    const text = pipelineText(good.replace("    x0M: 5\n    x1M: 6", "    x0M: 55\n    x1M: 60"));
    const line = lineOf(text, "kind: rectangle");
    expect(() => parsePipelineText(text, "study.yaml", "/tmp")).toThrow(new RegExp(`line ${line}, .*rectangle .*lies outside the grid`));
  });

  it("names the line of a layer with Vp/Vs at or below √2 and of a gradient that turns a velocity negative", () => {
    const text = pipelineText(good.replace("vp: 1600, vs: 190", "vp: 250, vs: 190"));
    expect(() => parsePipelineText(text, "study.yaml", "/tmp")).toThrow(new RegExp(`line ${lineOf(text, "vp: 250, vs: 190")}, .*Vp/Vs = 1\\.316`));
    const r = buildModelStep.params.safeParse({ grid: { widthM: 10, depthM: 20 }, layers: [{ topM: 0, vp: 800, vs: 200, rho: 1800, vsGradient: -20 }] });
    expect(r.success).toBe(false);
    expect(r.error!.issues[0].path).toEqual(["layers", 0, "vsGradient"]);
  });

  it("asks for the grid size and ordered layers", () => {
    const r = buildModelStep.params.safeParse({ grid: { spacingM: 1 }, layers: [{ topM: 0, vp: 800, vs: 200, rho: 1800 }] });
    expect(r.error!.issues.map((i) => i.path.join("."))).toEqual(["grid.widthM", "grid.depthM"]);
    const s = buildModelStep.params.safeParse({
      layers: [{ topM: 0, vp: 800, vs: 200, rho: 1800 }, { topM: 0, vp: 800, vs: 200, rho: 1800 }],
    });
    expect(s.error!.issues[0].path).toEqual(["layers", 1, "topM"]);
  });
});

describe("build-model run", () => {
  it("builds the grid and reports its extremes", async () => {
    const p = parse({
      grid: { originXM: -5, spacingM: 0.5, widthM: 20, depthM: 10 },
      layers: [{ topM: 0, vp: 500, vs: 150, rho: 1700, vsGradient: 10 }],
      shapes: [{ kind: "rectangle", x0M: 0, x1M: 2, z0M: 0, z1M: 1, vs: 90, vp: 250 }],
    });
    const res = await buildModelStep.run({}, p, makeStepContext());
    const m = res.outputs.model!;
    expect([m.nx, m.nz, m.originX, m.spacingM]).toEqual([41, 21, -5, 0.5]);
    expect(res.summary).toMatchObject({ vsMin: 90, vsMax: 250, vpMax: 500, gridFrom: "grid settings", originXM: -5 });
  });

  it("refuses a shape that covers no grid node, naming it", async () => {
    const p = parse({
      grid: { spacingM: 1, widthM: 20, depthM: 10 },
      shapes: [{ kind: "ellipse", centerXM: 5.5, centerZM: 5.5, radiusXM: 0.2, radiusZM: 0.2, vs: 90 }],
    });
    await expect(buildModelStep.run({}, p, makeStepContext())).rejects.toThrow(/shapes\[0\] \(ellipse.*covers no grid node/);
  });

  it("refuses a cell with Vp/Vs ≤ √2 made by a shape that sets Vs only, naming the cell", async () => {
    const p = parse({ grid: { spacingM: 1, widthM: 20, depthM: 10 }, layers: [{ topM: 0, vp: 500, vs: 150, rho: 1700 }], shapes: [{ kind: "rectangle", x0M: 3, x1M: 4, z0M: 2, z1M: 2, vs: 400 }] });
    await expect(buildModelStep.run({}, p, makeStepContext())).rejects.toThrow(/Vp\/Vs = 1\.25 .* cell \(column 3, row 2\) at x = 3 m, z = 2 m/);
  });

  it("imports an inline CSV grid and draws shapes over it", async () => {
    const rows = ["x,z,vp,vs,rho"];
    for (let j = 0; j < 5; j++) for (let i = 0; i < 6; i++) rows.push(`${i * 0.5},${j * 0.5},${600 + j},${200 + i},1800`);
    const p = parse({ csvGrid: rows.join("\n"), shapes: [{ kind: "rectangle", x0M: 0, x1M: 0, z0M: 0, z1M: 0, rho: 2500 }] });
    const m = (await buildModelStep.run({}, p, makeStepContext())).outputs.model!;
    expect([m.nx, m.nz, m.spacingM]).toEqual([6, 5, 0.5]);
    expect(m.vs[2 * 6 + 3]).toBe(203);
    expect(m.rho[0]).toBe(2500);
    expect(m.rho[1]).toBe(1800);
    const bad = parse({ csvGrid: rows.slice(0, 3).join("\n").replace("600", "abc") });
    await expect(buildModelStep.run({}, bad, makeStepContext())).rejects.toThrow(/csvGrid: line 2: column "vp" is "abc"/);
  });

  it("sizes the grid from the spread of the gathers", async () => {
    const g = makeGather({ traceCount: 24, sampleCount: 10, sampleIntervalS: 0.001, sourceX: -1, firstReceiverX: 0, receiverSpacingM: 1 });
    const p = parse({ grid: { fromSpread: true, spreadMarginM: 4, spacingM: 0.5, depthM: 10 } });
    const res = await buildModelStep.run({ gathers: { kind: "gathers", gathers: [g] } }, p, makeStepContext());
    const m = res.outputs.model!;
    // Spread from x = -1 (source) to 23 m (last receiver), 4 m margin each side: -5 to 27 m.
    expect(m.originX).toBe(-5);
    expect(m.originX + (m.nx - 1) * m.spacingM).toBe(27);
    // The summary states the model's origin, not the unused grid.originXM setting (0 by default),
    // and says where the grid came from.
    expect(p.grid.originXM).toBe(0);
    expect(res.summary).toMatchObject({ gridFrom: "spread of the gathers ± 4 m", originXM: -5, originZM: 0, nx: m.nx });
    await expect(buildModelStep.run({}, p, makeStepContext())).rejects.toThrow(/fromSpread needs gathers/);
  });
});

describe("build-model with a first-arrival tomogram", () => {
  // A tomogram whose rays reach 2 m everywhere: Vp 300 m/s there. The blend takes the tomogram
  // down to the reach depth less the 1 m fade, the layers below the reach depth (common practice:
  // trust a tomogram only where its rays go).
  const nx = 11;
  const nz = 9;
  const tomogram = {
    kind: "tomogram" as const,
    wave: "p" as const,
    nx,
    nz,
    spacingM: 0.5,
    originX: 0,
    originZ: 0,
    velocity: new Float32Array(nx * nz).fill(300),
    startingVelocity: new Float32Array(nx * nz).fill(400),
    coverageM: new Float32Array(nx * nz).fill(1),
    rayCount: new Int32Array(nx * nz).fill(1),
    coverageThresholdM: 1,
    reachDepthM: new Float32Array(nx).fill(2),
    rayPoints: new Float32Array(0),
    rayStart: new Int32Array(0),
    picks: [],
    iterations: [],
  };
  const settings = (tomogramAbove?: boolean) =>
    parse({ grid: { originXM: 0, widthM: 5, depthM: 4, spacingM: 0.5 }, layers: [{ topM: 0, vp: 500, vs: 150, rho: 1800 }], ...(tomogramAbove === undefined ? {} : { tomogramAbove }) });

  it("takes Vp from the tomogram above its reach, the layers below, and keeps Vp ≥ 1.5 Vs", async () => {
    const res = await buildModelStep.run({ tomogram }, settings(true), makeStepContext());
    const m = res.outputs.model!;
    const at = (z: number) => m.vp[Math.round(z / 0.5) * m.nx + 4];
    expect(at(0)).toBeCloseTo(300, 3);
    expect(at(1)).toBeCloseTo(300, 3);
    expect(at(1.5)).toBeCloseTo(400, 3); // half way through the 1 m fade
    expect(at(3)).toBe(500);
    for (let k = 0; k < m.vp.length; k++) expect(m.vp[k]).toBeGreaterThanOrEqual(1.5 * m.vs[k] - 1e-3);
  });

  it("leaves the model alone without the setting, and refuses the setting without a tomogram", async () => {
    const res = await buildModelStep.run({ tomogram }, settings(), makeStepContext());
    expect(Array.from(res.outputs.model!.vp).every((v) => v === 500)).toBe(true);
    await expect(buildModelStep.run({}, settings(true), makeStepContext())).rejects.toThrow(/tomogramAbove needs the tomogram/);
  });
});
