// Compiles the AssemblyScript sources in pipeline/kernels/assembly/ (one entry file per kernel,
// `<name>.ts`) to pipeline/kernels/wasm/<name>.wasm. Runs at `npm install` (postinstall), as
// `npm run build:wasm`, and before the tests. Skips a kernel whose .wasm is newer than every
// AssemblyScript source and this script, so repeated runs are fast. Needs no download: the
// compiler is the `assemblyscript` dev dependency.
import fs from "node:fs";
import path from "node:path";
import { fileURLToPath } from "node:url";

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), "..");
const srcDir = path.join(root, "pipeline", "kernels", "assembly");
const outDir = path.join(root, "pipeline", "kernels", "wasm");
const force = process.argv.includes("--force");

// SIMD is off by default in AssemblyScript 0.28 (error AS103 without it); no runtime is needed
// because the kernels never allocate.
const COMPILER_FLAGS = ["-O3", "--noAssert", "--runtime", "stub", "--enable", "simd"];

function newestSourceTime() {
  let newest = fs.statSync(fileURLToPath(import.meta.url)).mtimeMs;
  for (const f of fs.readdirSync(srcDir)) {
    if (f.endsWith(".ts")) newest = Math.max(newest, fs.statSync(path.join(srcDir, f)).mtimeMs);
  }
  return newest;
}

async function main() {
  if (!fs.existsSync(srcDir)) return;
  const entries = fs.readdirSync(srcDir).filter((f) => f.endsWith(".ts") && !f.endsWith(".d.ts")).sort();
  const newest = newestSourceTime();
  const stale = entries.filter((f) => {
    const out = path.join(outDir, f.replace(/\.ts$/, ".wasm"));
    return force || !fs.existsSync(out) || fs.statSync(out).mtimeMs < newest;
  });
  if (stale.length === 0) return;

  let asc;
  try {
    asc = (await import("assemblyscript/asc")).default;
  } catch {
    // Production installs without dev dependencies: the solver will say how to build it.
    console.warn("build-wasm: the AssemblyScript compiler (dev dependency) is not installed; WebAssembly kernels not built.");
    return;
  }
  fs.mkdirSync(outDir, { recursive: true });
  for (const f of stale) {
    const name = f.replace(/\.ts$/, "");
    const out = path.join(outDir, `${name}.wasm`);
    // Write to a temporary name first so a concurrent reader never sees a half-written file.
    const tmp = `${out}.${process.pid}.tmp`;
    const { error, stderr } = await asc.main(
      [path.relative(root, path.join(srcDir, f)), "--outFile", path.relative(root, tmp), ...COMPILER_FLAGS],
      { stdout: { write() { return true; } }, stderr: undefined, cwd: root },
    );
    if (error) {
      fs.rmSync(tmp, { force: true });
      console.error(stderr.toString());
      console.error(`build-wasm: compiling ${f} failed: ${error.message}`);
      process.exitCode = 1;
      return;
    }
    fs.renameSync(tmp, out);
    console.log(`build-wasm: ${path.relative(root, out)}`);
  }
}

await main();
