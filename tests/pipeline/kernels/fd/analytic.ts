/**
 * Closed-form references for the solver tests.
 *
 * 2D SH (scalar) Green's function of a line force in a homogeneous full space (e.g. Aki &
 * Richards, Quantitative Seismology, 2nd ed., the 2D Green's function of the scalar wave equation):
 * u(r, t) = F(t) ∗ H(t − r/β) / (2π ρ β² √(t² − r²/β²)).
 * With τ = (r/β)·cosh s the singular convolution becomes a smooth integral,
 * u(r, t) = 1/(2π ρ β²) ∫₀^{acosh(tβ/r)} F(t − (r/β) cosh s) ds, and the particle velocity is the
 * same integral of F′ (F is zero at its start, so the moving upper limit adds nothing).
 */
import { ricker } from "../../../../pipeline/kernels/fd/wavelet";

/** Time derivative of the Ricker wavelet (1 − 2a²) e^{−a²}, a = π f (t − t0). */
export function rickerDerivative(t: number, f: number, t0: number): number {
  const k = Math.PI * f;
  const a = k * (t - t0);
  return k * Math.exp(-a * a) * (-4 * a - 2 * a * (1 - 2 * a * a));
}

/** Particle velocity of the 2D SH line-force Green's function convolved with a Ricker force, m/s per N/m. */
export function shLineForceVelocity(r: number, t: number, beta: number, rho: number, f: number, t0: number): number {
  const T = r / beta;
  if (t <= T) return 0;
  const sMax = Math.acosh(t / T);
  const n = 4000;
  const ds = sMax / n;
  let sum = 0;
  // Composite Simpson rule on a smooth integrand.
  for (let k = 0; k <= n; k++) {
    const w = k === 0 || k === n ? 1 : k % 2 === 1 ? 4 : 2;
    sum += w * rickerDerivative(t - T * Math.cosh(k * ds), f, t0);
  }
  return (sum * ds) / 3 / (2 * Math.PI * rho * beta * beta);
}

export { ricker };
