/**
 * Small steps for testing the engine itself (caching, reruns, cancel, crash recovery) without
 * depending on the numerics of the real steps. Registered only by the tests that import this.
 */
import fs from "node:fs";
import { z } from "zod";
import { defineStep, StepInputError, throwIfAborted } from "../../pipeline/step";
import { registerStep, listSteps } from "../../pipeline/registry";
import type { GatherSet } from "../../pipeline/types";

/** How often each step's run() was called in this process. */
export const calls: Record<string, number> = {};
const count = (id: string) => (calls[id] = (calls[id] ?? 0) + 1);

export const makeTraces = defineStep({
  id: "test-make-traces",
  version: 1,
  title: "make constant traces",
  description: "test step",
  reads: [],
  writes: ["gathers"],
  params: z.object({
    traces: z.number().int().positive().default(3).describe("trace count"),
    samples: z.number().int().positive().default(8).describe("samples per trace"),
    value: z.number().default(1).describe("sample value"),
  }),
  async run(_input, p) {
    count("test-make-traces");
    const data = new Float32Array(p.traces * p.samples).fill(p.value);
    const set: GatherSet = {
      kind: "gathers",
      gathers: [
        {
          id: "g1",
          sampleIntervalS: 0.001,
          sampleCount: p.samples,
          startTimeS: 0,
          traces: Array.from({ length: p.traces }, (_, i) => ({
            sourceFile: "test",
            channel: i + 1,
            sourcePoint: 1,
            blow: 1,
            sourceX: 0,
            sourceZ: 0,
            receiverX: i,
            receiverZ: 0,
            offset: i,
            stackCount: 1,
            component: "z" as const,
            dead: false,
          })),
          data,
        },
      ],
    };
    return { outputs: { gathers: set }, summary: { traces: p.traces } };
  },
});

export const scaleTraces = defineStep({
  id: "test-scale",
  version: 1,
  title: "scale traces",
  description: "test step",
  reads: ["gathers"],
  writes: ["gathers"],
  params: z.object({ factor: z.number().default(2).describe("scale factor") }),
  async run(input, p, ctx) {
    count("test-scale");
    ctx.log.info({ factor: p.factor }, "scaling");
    const set = input.gathers!;
    return {
      outputs: {
        gathers: { kind: "gathers", gathers: set.gathers.map((g) => ({ ...g, data: g.data.map((v) => v * p.factor) })) },
      },
      series: [{ name: "scale", xLabel: "x", yLabel: "y", points: [{ x: 0, y: p.factor }] }],
    };
  },
});

export const waitStep = defineStep({
  id: "test-wait",
  version: 1,
  title: "wait",
  description: "test step: waits in small slices, checking for cancel; can touch a file when it starts",
  reads: ["gathers"],
  writes: ["gathers"],
  params: z.object({
    ms: z.number().int().nonnegative().default(0).describe("how long to wait, ms"),
    startedFlagFile: z.string().default("").describe("file to create when the step starts"),
    releaseFile: z.string().default("").describe("stop waiting as soon as this file exists"),
  }),
  async run(input, p, ctx) {
    count("test-wait");
    if (p.startedFlagFile) fs.writeFileSync(p.startedFlagFile, String(process.pid));
    const end = Date.now() + p.ms;
    while (Date.now() < end && !(p.releaseFile && fs.existsSync(p.releaseFile))) {
      throwIfAborted(ctx.signal);
      ctx.progress(1 - (end - Date.now()) / Math.max(p.ms, 1));
      await new Promise((r) => setTimeout(r, 20));
    }
    return { outputs: { gathers: input.gathers } };
  },
});

export const failStep = defineStep({
  id: "test-fail",
  version: 1,
  title: "fail",
  description: "test step that refuses its input",
  reads: ["gathers"],
  writes: ["gathers"],
  params: z.object({ when: z.enum(["always", "never"]).default("always").describe("whether to fail") }),
  async run(input, p) {
    count("test-fail");
    if (p.when === "always") throw new StepInputError("the traces are not what this step expects (test)", "when");
    return { outputs: { gathers: input.gathers } };
  },
});

export const listFiles = defineStep({
  id: "test-list-files",
  version: 1,
  title: "list field files",
  description: "test step: reports the names and sizes of the field files it was given",
  reads: ["fieldFiles"],
  writes: ["report"],
  params: z.object({}),
  async run(input) {
    count("test-list-files");
    const files = input.fieldFiles!.files.map((f) => ({ name: f.name, size: f.bytes.length }));
    return { outputs: { report: { kind: "json", role: "files", data: files } } };
  },
});

export const readTable = defineStep({
  id: "test-read-table",
  version: 1,
  title: "read the geometry table",
  description: "test step: reports the text of the geometry table it was given",
  reads: ["geometryTable"],
  writes: ["report"],
  params: z.object({ tag: z.string().default("").describe("free text, to force a new cache key") }),
  async run(input) {
    count("test-read-table");
    return { outputs: { report: { kind: "json", role: "table", data: input.geometryTable!.text } } };
  },
});

export const readLabel = defineStep({
  id: "test-read-label",
  version: 1,
  title: "label",
  description: "test step with one text setting",
  reads: ["gathers"],
  writes: ["report"],
  params: z.object({ label: z.string().default("").describe("free text") }),
  async run(_input, p) {
    return { outputs: { report: { kind: "json", role: "label", data: p.label } } };
  },
});

/**
 * A long iterative step: each iteration updates a small vector (x <- 1.5 x + 1, started from the
 * first sample of its input), records it as an intermediate result, adds a misfit point and saves
 * a checkpoint. It continues from its checkpoint when one exists. With `holdAfter` it touches
 * `startedFlagFile` after that iteration's checkpoint and waits for `releaseFile`.
 */
export const iterateStep = defineStep({
  id: "test-iterate",
  version: 1,
  title: "iterate",
  description: "test step: records one intermediate result, one misfit point and one checkpoint per iteration",
  reads: ["gathers"],
  writes: ["report"],
  params: z.object({
    iterations: z.number().int().positive().default(10).describe("iteration count"),
    holdAfter: z.number().int().default(-1).describe("iteration after which to wait for releaseFile (-1: never)"),
    startedFlagFile: z.string().default("").describe("file to create when holding"),
    releaseFile: z.string().default("").describe("stop holding as soon as this file exists"),
  }),
  async run(input, p, ctx) {
    count("test-iterate");
    const checkpoint = ctx.loadCheckpoint() as { iteration: number; values: Float64Array } | null;
    let values = checkpoint?.values ?? new Float64Array(4).fill(input.gathers!.gathers[0].data[0]);
    for (let i = checkpoint ? checkpoint.iteration + 1 : 0; i < p.iterations; i++) {
      throwIfAborted(ctx.signal);
      count("test-iterate:iteration");
      values = values.map((x) => 1.5 * x + 1);
      ctx.recordIntermediate({ kind: "model", index: i, label: `iteration ${i + 1}`, value: { kind: "vector", values }, meta: { misfit: 1 / (i + 1) } });
      ctx.extendSeries({ name: "misfit", xLabel: "iteration", yLabel: "misfit" }, [{ x: i, y: 1 / (i + 1) }]);
      ctx.saveCheckpoint({ iteration: i, values });
      ctx.progress((i + 1) / p.iterations, `iteration ${i + 1}`);
      if (i === p.holdAfter) {
        if (p.startedFlagFile) fs.writeFileSync(p.startedFlagFile, String(process.pid));
        while (!(p.releaseFile && fs.existsSync(p.releaseFile))) {
          throwIfAborted(ctx.signal);
          await new Promise((r) => setTimeout(r, 20));
        }
      }
    }
    return { outputs: { report: { kind: "json", role: "iterate", data: Array.from(values) } } };
  },
});

export const poisonStep = defineStep({
  id: "test-poison",
  version: 1,
  title: "poison one sample",
  description: "test step: puts a non-finite value into one sample of one trace, as a faulty step would",
  reads: ["gathers"],
  writes: ["gathers"],
  params: z.object({
    trace: z.number().int().nonnegative().default(1).describe("0-based trace index"),
    sample: z.number().int().nonnegative().default(0).describe("0-based sample index"),
    what: z.enum(["nan", "infinity"]).default("nan").describe("value written"),
  }),
  async run(input, p) {
    count("test-poison");
    const set = input.gathers!;
    const gathers = set.gathers.map((g, k) => {
      const data = g.data.slice();
      if (k === 0) data[p.trace * g.sampleCount + p.sample] = p.what === "nan" ? NaN : -Infinity;
      return { ...g, data };
    });
    return { outputs: { gathers: { kind: "gathers", gathers } } };
  },
});

/**
 * A small two-layer elastic model: `nx` columns by `nz` rows at `spacingM`, the top `topRows` rows
 * at the top velocities, the rest at the bottom ones (density 1800 and 2000 kg/m³).
 */
export const makeModel = defineStep({
  id: "test-make-model",
  version: 1,
  title: "make a layered model",
  description: "test step: writes a small two-layer elastic model",
  reads: [],
  writes: ["model"],
  params: z.object({
    nx: z.number().int().positive().default(3).describe("columns"),
    nz: z.number().int().positive().default(2).describe("rows"),
    spacingM: z.number().positive().default(0.5).describe("grid spacing, m"),
    topRows: z.number().int().nonnegative().default(1).describe("rows in the top layer"),
  }),
  async run(_input, p) {
    count("test-make-model");
    const n = p.nx * p.nz;
    const vp = new Float32Array(n);
    const vs = new Float32Array(n);
    const rho = new Float32Array(n);
    for (let i = 0; i < n; i++) {
      const top = Math.floor(i / p.nx) < p.topRows;
      vp[i] = top ? 500 : 1500;
      vs[i] = top ? 250 : 600;
      rho[i] = top ? 1800 : 2000;
    }
    return { outputs: { model: { kind: "model", nx: p.nx, nz: p.nz, spacingM: p.spacingM, originX: 0, originZ: 0, vp, vs, rho } } };
  },
});

/** Registers the test steps once per process. */
export function registerEngineTestSteps(): void {
  for (const s of [makeTraces, scaleTraces, waitStep, failStep, listFiles, readTable, readLabel, iterateStep, poisonStep, makeModel]) {
    if (!listSteps().some((x) => x.id === s.id)) registerStep(s);
  }
}
