/**
 * Loads the WebAssembly build of the elastic kernel (pipeline/kernels/wasm/elastic.wasm, compiled
 * from pipeline/kernels/assembly/elastic.ts by scripts/build-wasm.mjs) and binds it to a layout.
 */
import fs from "node:fs";
import { fileURLToPath } from "node:url";
import { AppError } from "../../errors";
import { planLayout, writeConfigTable, type FdLayout, type WaveMode } from "./layout";
import type { FdKernel } from "./reference-kernel";

interface ElasticExports {
  memory: WebAssembly.Memory;
  heapBase(): number;
  configure(table: number): void;
  psvStep(): void;
  shStep(): void;
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
}

/** Instantiates the WebAssembly kernel with memory for `opts`, configured for that layout. */
export function createWasmKernel(opts: {
  mode: WaveMode;
  modelNx: number;
  modelNz: number;
  pmlCells: number;
  freeSurface: boolean;
}): BoundKernel {
  const instance = new WebAssembly.Instance(elasticModule(), {});
  const ex = instance.exports as unknown as ElasticExports;
  const layout = planLayout({ ...opts, baseByte: Math.ceil(ex.heapBase() / 16) * 16 });
  const have = ex.memory.buffer.byteLength;
  if (layout.totalBytes > have) {
    const pages = Math.ceil((layout.totalBytes - have) / 65536);
    if (have / 65536 + pages > 65536) {
      throw new RangeError(`grid too large for WebAssembly memory: ${layout.totalBytes} bytes needed`);
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
  return { kernel, layout, mem };
}
