/**
 * Loads the WebAssembly build of the elastic kernel (pipeline/kernels/wasm/elastic.wasm, compiled
 * from pipeline/kernels/assembly/elastic.ts by scripts/build-wasm.mjs) and binds it to a layout.
 */
import fs from "node:fs";
import { fileURLToPath } from "node:url";
import { AppError } from "../../errors";
import { HALO_X, planLayout, writeConfigTable, type FdLayout, type WaveMode } from "./layout";
import type { FdKernel } from "./reference-kernel";

interface ElasticExports {
  memory: WebAssembly.Memory;
  heapBase(): number;
  configure(table: number): void;
  psvStep(): void;
  shStep(): void;
  configureShot(table: number): void;
  psvAdvance(first: number, count: number): void;
  shAdvance(first: number, count: number): void;
}

const WASM_URL = new URL("../wasm/elastic.wasm", import.meta.url);
let compiled: WebAssembly.Module | undefined;

/** The compiled module, read once per thread. Throws an AppError telling how to build it when missing. */
export function elasticModule(): WebAssembly.Module {
  if (compiled) return compiled;
  const file = fileURLToPath(WASM_URL);
  if (!fs.existsSync(file)) {
    throw new AppError(
      "internal",
      `The WebAssembly solver kernel ${file} is missing. Build it with \`npm run build:wasm\` (it is also built by \`npm install\`).`,
      { file },
    );
  }
  compiled = new WebAssembly.Module(fs.readFileSync(file));
  return compiled;
}

/** A kernel instance together with its memory views. */
export interface BoundKernel {
  kernel: FdKernel;
  layout: FdLayout;
  /** The whole buffer as float32 (views stay valid: memory is grown once, before they are made). */
  mem: Float32Array;
  /**
   * Prepares several-steps-per-call stepping with the shot's sources and receivers handled inside
   * the kernel (see {@link Stepper}); each call replaces the previous plan.
   */
  createStepper(plan: SteppingPlan): Stepper;
}

/** Sources and receivers of one shot for {@link BoundKernel.createStepper}. Indices are float offsets into `mem`. */
export interface SteppingPlan {
  /**
   * Source cells (at most {@link MAX_STEPPER_SOURCES}), each with the index of a mirror cell set to
   * minus the cell after every increment (a stress imaged above a free surface), or -1.
   */
  sources: ReadonlyArray<{ index: number; mirror: number }>;
  /**
   * true: the sources are stress cells and step 0 gets no increment; false: velocity cells, every
   * step gets one.
   */
  atStress: boolean;
  /** Receiver cells (at most the `maxReceiverPoints` the kernel was made with), captured after every step. */
  receivers: ArrayLike<number>;
}

/** Advances a kernel several steps per call (see {@link BoundKernel.createStepper}). */
export interface Stepper {
  /** Most steps per call. */
  readonly maxSteps: number;
  /**
   * Runs steps n = first .. first+count-1. Before step n each source cell e becomes
   * flush(f32(cell + increments[(n-first)·sources + e])) (no increment at step 0 for stress
   * sources), its mirror minus that; after step n the receiver cells are copied, in plan order, to
   * row n-first of the returned view `[step][receiver]` (valid until the next call). The wavefields
   * are those of `count` calls of `kernel.step()` with the same increments added between them.
   */
  advance(first: number, count: number, increments: Float32Array): Float32Array;
}

/** Most source cells a stepper takes (a bilinear point on two stress fields). */
export const MAX_STEPPER_SOURCES = 16;

/** Instantiates the WebAssembly kernel with memory for `opts`, configured for that layout. */
export function createWasmKernel(opts: {
  mode: WaveMode;
  modelNx: number;
  modelNz: number;
  pmlCells: number;
  freeSurface: boolean;
  /** Room for the stepper: receiver cells (default 2048) and steps per call (default 64). */
  maxReceiverPoints?: number;
  maxStepsPerCall?: number;
}): BoundKernel {
  const instance = new WebAssembly.Instance(elasticModule(), {});
  const ex = instance.exports as unknown as ElasticExports;
  const layout = planLayout({ ...opts, baseByte: Math.ceil(ex.heapBase() / 16) * 16 });
  const maxRec = opts.maxReceiverPoints ?? 2048;
  const maxSteps = opts.maxStepsPerCall ?? 64;
  for (const [k, v] of Object.entries({ maxReceiverPoints: maxRec, maxStepsPerCall: maxSteps })) {
    if (!Number.isInteger(v) || v < 1) throw new RangeError(`${k} must be an integer ≥ 1, got ${v}`);
  }
  // Stepper area after the layout (byte addresses): shot table, source entries, increments,
  // receiver entries, captured values.
  const shotTable = layout.totalBytes;
  const srcEntries = shotTable + 64;
  const incBytes = srcEntries + MAX_STEPPER_SOURCES * 12;
  const recEntries = incBytes + maxSteps * MAX_STEPPER_SOURCES * 4;
  const capBytes = recEntries + maxRec * 12;
  const totalBytes = capBytes + maxSteps * maxRec * 4;
  const have = ex.memory.buffer.byteLength;
  if (totalBytes > have) {
    const pages = Math.ceil((totalBytes - have) / 65536);
    if (have / 65536 + pages > 65536) {
      throw new RangeError(`grid too large for WebAssembly memory: ${totalBytes} bytes needed`);
    }
    ex.memory.grow(pages);
  }
  // Views are made after growing: growing detaches earlier views.
  const buf = ex.memory.buffer;
  const mem = new Float32Array(buf);
  // Fresh memory is zero; keep it so (a reused instance would need clearing).
  writeConfigTable(layout, new Int32Array(buf));
  ex.configure(layout.table * 4);
  // One exported call per time step: the engine optimises a WebAssembly function on a later call,
  // so the time loop stays out here.
  const kernel: FdKernel = { step: opts.mode === "psv" ? ex.psvStep : ex.shStep };
  const i32 = new Int32Array(buf);
  const rowOf = (index: number) => {
    // The field array holding `index`, then its row inside that array.
    const o = layout.offsets;
    let base = -1;
    for (const f of [o.f0, o.f1, o.f2, o.f3, o.f4]) if (f > 0 && f <= index && index < f + layout.gridFloats) base = f;
    if (base < 0) throw new RangeError(`index ${index} lies in no field array`);
    return Math.floor((index - base - layout.org + HALO_X + 2 * layout.rowFloats) / layout.rowFloats) - 2;
  };
  const createStepper = (plan: SteppingPlan): Stepper => {
    const ns = plan.sources.length;
    const nr = plan.receivers.length;
    if (ns > MAX_STEPPER_SOURCES) throw new RangeError(`sources: at most ${MAX_STEPPER_SOURCES} cells, got ${ns}`);
    if (nr > maxRec) throw new RangeError(`receivers: at most ${maxRec} cells (maxReceiverPoints), got ${nr}`);
    // A source cell gets its increment before the step first reads it: velocity cells at their
    // own row, stress cells two rows above (row 0 at the top).
    const src = plan.sources
      .map((s, e) => ({ ...s, e, row: plan.atStress ? Math.max(0, rowOf(s.index) - 2) : rowOf(s.index) }))
      .sort((a, b) => a.row - b.row || a.e - b.e);
    src.forEach((s, c) => {
      const q = srcEntries / 4 + 3 * c;
      i32[q] = s.index * 4;
      i32[q + 1] = s.row;
      i32[q + 2] = s.mirror >= 0 ? s.mirror * 4 : 0;
    });
    const rec = Array.from({ length: nr }, (_, k) => ({ index: plan.receivers[k], row: rowOf(plan.receivers[k]), k })).sort(
      (a, b) => a.row - b.row || a.k - b.k,
    );
    rec.forEach((r, c) => {
      const q = recEntries / 4 + 3 * c;
      i32[q] = r.index * 4;
      i32[q + 1] = r.row;
      i32[q + 2] = r.k;
    });
    const t = shotTable / 4;
    i32[t] = ns;
    i32[t + 1] = srcEntries;
    i32[t + 2] = incBytes;
    i32[t + 3] = plan.atStress ? 1 : 0;
    i32[t + 4] = nr;
    i32[t + 5] = recEntries;
    i32[t + 6] = capBytes;
    ex.configureShot(shotTable);
    const inc = new Float32Array(buf, incBytes, maxSteps * MAX_STEPPER_SOURCES);
    const cap = new Float32Array(buf, capBytes, maxSteps * maxRec);
    const run = opts.mode === "psv" ? ex.psvAdvance : ex.shAdvance;
    return {
      maxSteps,
      advance(first, count, increments) {
        if (!Number.isInteger(first) || first < 0) throw new RangeError(`first must be an integer ≥ 0, got ${first}`);
        if (!Number.isInteger(count) || count < 1 || count > maxSteps) throw new RangeError(`count must be an integer from 1 to ${maxSteps}, got ${count}`);
        if (increments.length < count * ns) throw new RangeError(`increments: need ${count * ns} values, got ${increments.length}`);
        // Increments in the kernel's (row-sorted) source order.
        for (let n = 0; n < count; n++) for (let c = 0; c < ns; c++) inc[n * ns + c] = increments[n * ns + src[c].e];
        run(first, count);
        return cap.subarray(0, count * nr);
      },
    };
  };
  return { kernel, layout, mem, createStepper };
}
