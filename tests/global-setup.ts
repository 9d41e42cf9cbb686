/**
 * Runs once before the test files: builds the WebAssembly kernels (scripts/build-wasm.mjs skips
 * them when they are up to date), so tests never depend on an earlier `npm install`.
 */
import { execFileSync } from "node:child_process";
import path from "node:path";

export default function setup(): void {
  const root = path.resolve(import.meta.dirname, "..");
  execFileSync(process.execPath, [path.join(root, "scripts", "build-wasm.mjs")], { cwd: root, stdio: "inherit" });
}
