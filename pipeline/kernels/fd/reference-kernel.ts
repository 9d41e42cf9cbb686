/**
 * Reference kernel: the readable specification of the time step that the WebAssembly kernel
 * (pipeline/kernels/assembly/elastic.ts) runs with SIMD. Same scheme, same float32 operations in
 * the same order (each rounded with Math.fround, which gives IEEE single results for +, -, ×, ÷
 * because binary64 has more than 2·24+2 bits), so both produce identical wavefields.
 *
 * Scheme: velocity-stress staggered grid (Virieux 1986), fourth-order differences with
 * coefficients 9/8 and -1/24 and leapfrog time stepping (Levander 1988). Positions of array
 * element (j, i): P-SV σxx, σzz at (i, j), vx at (i+½, j), vz at (i, j+½), σxz at (i+½, j+½);
 * SH vy at (i, j), σxy at (i+½, j), σyz at (i, j+½). Material coefficients are pre-scaled by dt/h.
 * Free surface on row 0 by stress imaging (Levander 1988); convolutional PML (Komatitsch & Martin
 * 2007, κ = 1) on the absorbing strips.
 */
import type { FdLayout } from "./layout";

const f = Math.fround;
/** Stored magnitudes below 2^-100 become zero. */
export const FLUSH_BELOW = 2 ** -100;
/**
 * Flush to zero: stored values below {@link FLUSH_BELOW} become +0, as in the WebAssembly kernel,
 * which does so because arithmetic on subnormal floats (below 2^-126) is many times slower and
 * products with the coefficients of values near 2^-126 would be subnormal. Far below any amplitude
 * of interest. NaN and infinity pass unchanged.
 */
const z = (x: number) => (Math.abs(x) < FLUSH_BELOW ? 0 : x);
/** Fourth-order staggered coefficients (Levander 1988). */
export const FD_C1 = f(9 / 8);
export const FD_C2 = f(-1 / 24);

/** A kernel advances the fields held in its buffer by one time step. */
export interface FdKernel {
  /** Velocities from stresses (plus PML terms), then stresses from velocities (plus PML terms and free surface). */
  step(): void;
}

/** The reference kernel's two half steps, exposed for reading and testing. */
export interface ReferenceKernel extends FdKernel {
  /** Velocities from stresses (plus PML terms). */
  velocity(): void;
  /** Stresses from velocities (plus PML terms and free surface). */
  stress(): void;
}

/** Fourth-order difference at position k between k-1 and k: c1 (s[k]-s[k-1]) + c2 (s[k+s]-s[k-2s]). */
function d4(a: Float32Array, k: number, s: number): number {
  return f(f(FD_C1 * f(a[k] - a[k - s])) + f(FD_C2 * f(a[k + s] - a[k - 2 * s])));
}

/** Creates the reference kernel over `mem` (the whole buffer as float32) with `layout`. */
export function createReferenceKernel(layout: FdLayout, mem: Float32Array): ReferenceKernel {
  const L = layout;
  const o = L.offsets;
  const r = L.rowFloats;
  const F = [o.f0, o.f1, o.f2, o.f3, o.f4];
  const M = [o.m0, o.m1, o.m2, o.m3, o.m4];

  /** PML term on the x strips: psi <- b psi + a d; f1 += m1 psi (and f2 += m2 psi). */
  function pmlX(sh: number, src: number, psi: number, a: number, b: number, f1: number, m1: number, f2 = -1, m2 = -1) {
    if (L.wx === 0) return;
    const right = L.nx - L.wx;
    for (let j = 0; j < L.nrows; j++) {
      // Free-surface row of the normal stresses: σxx with the surface modulus (held in m2), σzz stays 0.
      const surface = L.freeSurface && j === 0 && f2 >= 0;
      for (let i = 0; i < L.nx; i++) {
        let si: number;
        if (i < L.wx) si = i;
        else if (i >= right) si = i - right + L.wx;
        else continue;
        const c = L.org + j * r + i;
        const d = d4(mem, src + c + sh, 1);
        const p = psi + j * 2 * L.wx + si;
        const v = z(f(f(mem[b + i] * mem[p]) + f(mem[a + i] * d)));
        mem[p] = v;
        if (surface) {
          mem[f1 + c] = z(f(mem[f1 + c] + f(mem[m2 + c] * v)));
          continue;
        }
        mem[f1 + c] = z(f(mem[f1 + c] + f(mem[m1 + c] * v)));
        if (f2 >= 0) mem[f2 + c] = z(f(mem[f2 + c] + f(mem[m2 + c] * v)));
      }
    }
  }

  /** PML term on the z strips. */
  function pmlZ(sh: number, src: number, psi: number, a: number, b: number, f1: number, m1: number, f2 = -1, m2 = -1) {
    const bottom = L.nrows - L.wzBot;
    for (let j = 0; j < L.nrows; j++) {
      let sj: number;
      if (j < L.wzTop) sj = j;
      else if (j >= bottom) sj = j - bottom + L.wzTop;
      else continue;
      const av = mem[a + j];
      const bv = mem[b + j];
      for (let i = 0; i < L.nx; i++) {
        const c = L.org + j * r + i;
        const d = d4(mem, src + c + sh * r, r);
        const p = psi + sj * L.nxv + i;
        const v = z(f(f(bv * mem[p]) + f(av * d)));
        mem[p] = v;
        mem[f1 + c] = z(f(mem[f1 + c] + f(mem[m1 + c] * v)));
        if (f2 >= 0) mem[f2 + c] = z(f(mem[f2 + c] + f(mem[m2 + c] * v)));
      }
    }
  }

  if (L.mode === "psv") {
    const [vx, vz, sxx, szz, sxz] = F;
    const [bx, bz, mm, ll, mu] = M;
    return {
      step() {
        this.velocity();
        this.stress();
      },
      velocity() {
        for (let j = 0; j < L.nrows; j++) {
          for (let i = 0; i < L.nxv; i++) {
            const c = L.org + j * r + i;
            // vx at (i+½, j): ∂σxx/∂x + ∂σxz/∂z
            const dxx = d4(mem, sxx + c + 1, 1);
            const dzq = d4(mem, sxz + c, r);
            mem[vx + c] = z(f(mem[vx + c] + f(mem[bx + c] * f(dxx + dzq))));
            // vz at (i, j+½): ∂σxz/∂x + ∂σzz/∂z
            const dxq = d4(mem, sxz + c, 1);
            const dzz = d4(mem, szz + c + r, r);
            mem[vz + c] = z(f(mem[vz + c] + f(mem[bz + c] * f(dxq + dzz))));
          }
        }
        pmlX(1, sxx, o.px0, o.axH, o.bxH, vx, bx);
        pmlX(0, sxz, o.px1, o.axI, o.bxI, vz, bz);
        pmlZ(0, sxz, o.pz0, o.azI, o.bzI, vx, bx);
        pmlZ(1, szz, o.pz1, o.azH, o.bzH, vz, bz);
      },
      stress() {
        for (let j = 0; j < L.nrows; j++) {
          const surfaceRow = L.freeSurface && j === 0;
          for (let i = 0; i < L.nxv; i++) {
            const c = L.org + j * r + i;
            const dxvx = d4(mem, vx + c, 1);
            const dzvz = d4(mem, vz + c, r);
            const m = mem[mm + c];
            const l = mem[ll + c];
            if (surfaceRow) {
              // σzz = 0 at the surface: ∂vz/∂z = -(λ/M) ∂vx/∂x, so σxx grows with M − λ²/M,
              // which the λ array holds on this row.
              mem[sxx + c] = z(f(mem[sxx + c] + f(l * dxvx)));
              mem[szz + c] = 0;
            } else {
              mem[sxx + c] = z(f(mem[sxx + c] + f(f(m * dxvx) + f(l * dzvz))));
              mem[szz + c] = z(f(mem[szz + c] + f(f(l * dxvx) + f(m * dzvz))));
            }
            // σxz at (i+½, j+½): ∂vx/∂z + ∂vz/∂x
            const dzvx = d4(mem, vx + c + r, r);
            const dxvz = d4(mem, vz + c + 1, 1);
            mem[sxz + c] = z(f(mem[sxz + c] + f(mem[mu + c] * f(dzvx + dxvz))));
          }
        }
        pmlX(0, vx, o.px2, o.axI, o.bxI, sxx, mm, szz, ll);
        pmlZ(0, vz, o.pz2, o.azI, o.bzI, sxx, ll, szz, mm);
        pmlZ(1, vx, o.pz3, o.azH, o.bzH, sxz, mu);
        pmlX(1, vz, o.px3, o.axH, o.bxH, sxz, mu);
        if (L.freeSurface) {
          for (let i = 0; i < L.nx; i++) {
            const c = L.org + i;
            mem[szz + c] = 0;
            mem[szz + c - r] = -mem[szz + c + r];
            mem[szz + c - 2 * r] = -mem[szz + c + 2 * r];
            mem[sxz + c - r] = -mem[sxz + c];
            mem[sxz + c - 2 * r] = -mem[sxz + c + r];
          }
        }
      },
    };
  }

  const [vy, sxy, syz] = F;
  const [b, mux, muz] = M;
  return {
    step() {
      this.velocity();
      this.stress();
    },
    velocity() {
      for (let j = 0; j < L.nrows; j++) {
        for (let i = 0; i < L.nxv; i++) {
          const c = L.org + j * r + i;
          const dx = d4(mem, sxy + c, 1);
          const dz = d4(mem, syz + c, r);
          mem[vy + c] = z(f(mem[vy + c] + f(mem[b + c] * f(dx + dz))));
        }
      }
      pmlX(0, sxy, o.px0, o.axI, o.bxI, vy, b);
      pmlZ(0, syz, o.pz0, o.azI, o.bzI, vy, b);
    },
    stress() {
      for (let j = 0; j < L.nrows; j++) {
        for (let i = 0; i < L.nxv; i++) {
          const c = L.org + j * r + i;
          mem[sxy + c] = z(f(mem[sxy + c] + f(mem[mux + c] * d4(mem, vy + c + 1, 1))));
          mem[syz + c] = z(f(mem[syz + c] + f(mem[muz + c] * d4(mem, vy + c + r, r))));
        }
      }
      pmlX(1, vy, o.px1, o.axH, o.bxH, sxy, mux);
      pmlZ(1, vy, o.pz1, o.azH, o.bzH, syz, muz);
      if (L.freeSurface) {
        // σyz = 0 at z = 0 (the vy row): mirrored with opposite sign above it.
        for (let i = 0; i < L.nx; i++) {
          const c = syz + L.org + i;
          mem[c - r] = -mem[c];
          mem[c - 2 * r] = -mem[c + r];
        }
      }
    },
  };
}
