/**
 * The WebAssembly kernel's several-steps-per-call stepper (sources added and receivers captured
 * inside the kernel, several time steps per pass over the rows) against the TypeScript reference
 * kernel stepped one step at a time with the sources and receivers handled between steps, as the
 * shot driver does. Same float32 operations on every cell in the same order, so the captured
 * values and the final wavefields must agree bit for bit (IEEE 754 single precision; the reference
 * rounds each operation with Math.fround — Figueroa 1995, "When is double rounding innocuous?").
 */
import { describe, expect, it } from "vitest";
import { createWasmKernel } from "../../../../pipeline/kernels/fd/wasm-kernel";
import { createReferenceKernel, FLUSH_BELOW } from "../../../../pipeline/kernels/fd/reference-kernel";
import type { FdLayout } from "../../../../pipeline/kernels/fd/layout";
import { ricker } from "../../../../pipeline/kernels/fd/wavelet";
import { mulberry32 } from "../../../helpers/random";

const f32 = Math.fround;
const flush = (x: number) => (Math.abs(x) < FLUSH_BELOW ? 0 : x);

/**
 * Random medium (density 1500–2200 kg/m³, Vs 150–400 m/s, Vp/Vs 1.6–2.6) pre-scaled by s = dt/h
 * = 1e-4 s/m (Courant number at most 0.11, well inside the 0.606 limit of Levander 1988), and CPML
 * profiles on the strips (Komatitsch & Martin 2007, the form the solver uses).
 */
function fillMedium(L: FdLayout, mem: Float32Array, seed: number) {
  const rnd = mulberry32(seed);
  const s = 1e-4;
  const o = L.offsets;
  for (let j = 0; j < L.nrows; j++) {
    for (let i = 0; i < L.nx; i++) {
      const c = L.org + j * L.rowFloats + i;
      const rho = 1500 + 700 * rnd();
      const vs = 150 + 250 * rnd();
      const vp = vs * (1.6 + rnd());
      const mu = rho * vs * vs;
      const lam = rho * vp * vp - 2 * mu;
      if (L.mode === "psv") {
        mem[o.m0 + c] = s / rho;
        mem[o.m1 + c] = s / rho;
        mem[o.m2 + c] = s * (lam + 2 * mu);
        mem[o.m3 + c] = L.freeSurface && j === 0 ? s * (lam + 2 * mu - (lam * lam) / (lam + 2 * mu)) : s * lam;
        mem[o.m4 + c] = s * mu;
      } else {
        mem[o.m0 + c] = s / rho;
        mem[o.m1 + c] = s * mu;
        mem[o.m2 + c] = s * mu;
      }
    }
  }
  const dt = 1e-4;
  const n = Math.max(1, L.pmlCells);
  const coef = (dist: number): [number, number] => {
    if (dist <= 0 || L.pmlCells === 0) return [0, 1];
    const x = Math.min(1, dist / n);
    const d = ((-3 * 1000 * Math.log(1e-3)) / (2 * n)) * x * x;
    const alpha = Math.PI * 30 * (1 - x);
    const b = Math.exp(-(d + alpha) * dt);
    return [(d * (b - 1)) / (d + alpha), b];
  };
  const xd = (p: number) => Math.max(L.colOffset - p, p - (L.colOffset + L.modelNx - 1), 0);
  const zd = (p: number) => Math.max(p - (L.rowOffset + L.modelNz - 1), L.freeSurface ? 0 : L.rowOffset - p, 0);
  for (let i = 0; i < L.nxv; i++) {
    [mem[o.axI + i], mem[o.bxI + i]] = i < L.nx ? coef(xd(i)) : [0, 1];
    [mem[o.axH + i], mem[o.bxH + i]] = i < L.nx ? coef(xd(i + 0.5)) : [0, 1];
  }
  for (let j = 0; j < L.nrows; j++) {
    [mem[o.azI + j], mem[o.bzI + j]] = coef(zd(j));
    [mem[o.azH + j], mem[o.bzH + j]] = coef(zd(j + 0.5));
  }
}

interface Case {
  mode: "psv" | "sh";
  nx: number;
  nz: number;
  pml: number;
  fs: boolean;
  /** Source cells as (field, row, column) on the computational grid; stress sources are explosive. */
  source: "force" | "explosive";
  sourceRow: number;
  chunks: number[];
}

describe("several steps per call", () => {
  const cases: Case[] = [
    { mode: "psv", nx: 45, nz: 31, pml: 8, fs: true, source: "force", sourceRow: 3, chunks: [1, 3, 5, 64, 17, 2] },
    { mode: "psv", nx: 42, nz: 29, pml: 6, fs: true, source: "explosive", sourceRow: 1, chunks: [4, 7, 64, 11] },
    { mode: "psv", nx: 40, nz: 33, pml: 7, fs: false, source: "explosive", sourceRow: 20, chunks: [2, 64, 30] },
    { mode: "psv", nx: 43, nz: 30, pml: 8, fs: false, source: "force", sourceRow: 6, chunks: [64, 64, 5] },
    { mode: "psv", nx: 40, nz: 28, pml: 8, fs: true, source: "explosive", sourceRow: 2, chunks: [3, 64, 61] },
    { mode: "sh", nx: 43, nz: 30, pml: 8, fs: true, source: "force", sourceRow: 0, chunks: [5, 64, 9] },
    { mode: "sh", nx: 41, nz: 28, pml: 0, fs: false, source: "force", sourceRow: 12, chunks: [64, 36] },
  ];
  for (const c of cases) {
    it(`matches the reference kernel step by step: ${c.mode}, ${c.source} at row ${c.sourceRow}, free surface ${c.fs}, PML ${c.pml}`, () => {
      const opts = { mode: c.mode, modelNx: c.nx, modelNz: c.nz, pmlCells: c.pml, freeSurface: c.fs };
      const w = createWasmKernel(opts);
      const L = w.layout;
      fillMedium(L, w.mem, c.nx);
      const refMem = new Float32Array(L.totalBytes / 4);
      refMem.set(w.mem.subarray(0, refMem.length));
      const ref = createReferenceKernel(L, refMem);
      const o = L.offsets;
      const at = (field: number, row: number, col: number) => field + L.org + row * L.rowFloats + col;
      const col = L.colOffset + 11;
      const row = L.rowOffset + c.sourceRow;
      // A bilinear point: four cells on one field (force) or on σxx and σzz (explosive; σzz mirrored
      // above a free surface and left out on the surface row itself, as the shot driver does).
      const sources: Array<{ index: number; mirror: number; scale: number }> = [];
      for (const [dj, di, wt] of [[0, 0, 0.4], [0, 1, 0.3], [1, 0, 0.2], [1, 1, 0.1]] as const) {
        const r = row + dj;
        if (c.source === "force") {
          sources.push({ index: at(c.mode === "psv" ? o.f1 : o.f0, r, col + di), mirror: -1, scale: 3e-3 * wt });
        } else {
          sources.push({ index: at(o.f2, r, col + di), mirror: -1, scale: -2e2 * wt });
          if (!(c.fs && r === 0)) sources.push({ index: at(o.f3, r, col + di), mirror: c.fs && r <= 2 ? at(o.f3, -r, col + di) : -1, scale: -2e2 * wt });
        }
      }
      const recField = c.mode === "psv" ? o.f1 : o.f0;
      const receivers = [at(recField, 0, L.colOffset + 2), at(recField, 1, L.colOffset + 30), at(o.f0, L.nrows - 3, 20), at(recField, row + 1, col + 1)];
      const atStress = c.source === "explosive";
      const stepper = w.createStepper({ sources, atStress, receivers });
      const total = c.chunks.reduce((a, b) => a + b, 0);
      const stf = Array.from({ length: total }, (_, n) => ricker(n * 1e-4, 30, 0.04));
      // Reference: one step at a time, sources and receivers between steps (as the shot driver).
      const refTraces = new Float32Array(total * receivers.length);
      for (let n = 0; n < total; n++) {
        if (!atStress || n > 0) {
          const v = atStress ? stf[n - 1] : stf[n];
          for (const s of sources) {
            refMem[s.index] = flush(f32(refMem[s.index] + f32(s.scale * v)));
            if (s.mirror >= 0) refMem[s.mirror] = -refMem[s.index];
          }
        }
        ref.step();
        receivers.forEach((k, q) => (refTraces[n * receivers.length + q] = refMem[k]));
      }
      const traces = new Float32Array(total * receivers.length);
      let first = 0;
      for (const count of c.chunks) {
        const inc = new Float32Array(count * sources.length);
        for (let n = 0; n < count; n++) {
          const step = first + n;
          const v = atStress ? stf[Math.max(0, step - 1)] : stf[step];
          sources.forEach((s, e) => (inc[n * sources.length + e] = f32(s.scale * v)));
        }
        traces.set(stepper.advance(first, count, inc), first * receivers.length);
        first += count;
      }
      let peak = 0;
      for (const v of refTraces) peak = Math.max(peak, Math.abs(v));
      expect(peak).toBeGreaterThan(0);
      expect(Array.from(traces)).toEqual(Array.from(refTraces));
      const fields = c.mode === "psv" ? [o.f0, o.f1, o.f2, o.f3, o.f4] : [o.f0, o.f1, o.f2];
      for (const f of fields) {
        expect(Array.from(w.mem.subarray(f, f + L.gridFloats))).toEqual(Array.from(refMem.subarray(f, f + L.gridFloats)));
      }
    });
  }

  it("refuses a call longer than its room and too many source cells", () => {
    const w = createWasmKernel({ mode: "sh", modelNx: 16, modelNz: 16, pmlCells: 4, freeSurface: true, maxStepsPerCall: 8 });
    const s = w.createStepper({ sources: [{ index: w.layout.offsets.f0 + w.layout.org, mirror: -1 }], atStress: false, receivers: [] });
    expect(() => s.advance(0, 9, new Float32Array(9))).toThrow(/count must be an integer from 1 to 8, got 9/);
    const many = Array.from({ length: 17 }, (_, k) => ({ index: w.layout.offsets.f0 + w.layout.org + k, mirror: -1 }));
    expect(() => w.createStepper({ sources: many, atStress: false, receivers: [] })).toThrow(/at most 16 cells, got 17/);
  });
});
