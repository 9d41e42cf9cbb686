/**
 * Point-source to line-source conversion of traces (Forbriger, Groos & Schäfer 2014, Geophys. J.
 * Int. 198, "Line-source simulation for shallow-seismic data. Part 1: theoretical background").
 *
 * Why it works — the scalar (acoustic) Green's functions of a homogeneous full space with wave
 * speed c, source-receiver distance r and T = r/c:
 *   3D (point source):  G3(t) = δ(t − T) / (4π r)
 *   2D (line source):   G2(t) = H(t − T) / (2π √(t² − T²))
 * In the frequency domain (e^{iωt} convention) G3 = e^{−iωT}/(4πr) and, for ωT ≫ 1,
 * G2 = −(i/4) H0⁽²⁾(ωT) ≈ −(i/4) √(2/(π ωT)) e^{−i(ωT − π/4)}, so
 *   G2 / G3 ≈ √(2π r c) · (iω)^(−1/2).
 * (iω)^(−1/2) is the Fourier transform of H(t)/√(π t) (the half-order integral), hence the
 * single-velocity transformation
 *   u_line(t) = √(2 r v) · [u_point ∗ H(t)/√t](t).
 * Applied to G3 it gives √(2rc)/(4πr) · H(t − T)/√(t − T) = H(t − T)/(2π √(2T) √(t − T)), which
 * equals G2 where it matters, at the arrival (√(t² − T²) = √(t − T)√(t + T) ≈ √(2T)√(t − T)),
 * and decays too slowly afterwards; the error shrinks as the wavelet's period becomes small
 * against T (far field).
 * The direct-wave transformation (the procedure the paper recommends for shallow-seismic data:
 * convolve with 1/√t, taper with 1/√t, scale by r√2) puts v = r/t, the velocity of a direct
 * wave arriving at time t, into the factor and applies it after the convolution:
 *   u_line(t) = r √2 · t^(−1/2) · [u_point ∗ H(t)/√t](t),
 * which needs no velocity. Applied to G3 it gives √2 / (4π √t √(t − T)): equal to G2 at the
 * arrival (√t → √T) and, unlike the single-velocity form, decaying like G2 (as 1/t) late in
 * the trace; between the two it replaces the arithmetic mean (t + T)/2 by t.
 * The convolution with H(t)/√t has an integrable singularity at t = 0. It is done by product
 * integration: the trace is taken piecewise linear between samples and each hat function is
 * integrated exactly against τ^(−1/2), which gives weights w_j (j = lag in samples):
 *   w_0 = (4/3) √h,
 *   w_j = √h [ (2/3)(j^{3/2} − (j−1)^{3/2}) − 2(j−1)(√j − √(j−1))
 *              + 2(j+1)(√(j+1) − √j) − (2/3)((j+1)^{3/2} − j^{3/2}) ],  j ≥ 1.
 * For a trace linear in t from zero the result is exact ((4/3) t^{3/2} for f = t).
 * The sum runs through an FFT (fft.js) of twice the trace length.
 */
import { createFftPlan, convolveWithSpectrum, forwardReal, nextPowerOfTwo } from "./fft";
import { assertFinite, assertTraceBlock } from "./taper";

/** Which transformation of Forbriger et al. (2014). */
export type LineSourceMethod = "single-velocity" | "direct-wave";

/** Product-integration weights of ∫ f(t − τ) τ^(−1/2) dτ for `count` lags of interval `h` (s). */
export function inverseSqrtTimeWeights(count: number, h: number): Float64Array {
  if (!Number.isInteger(count) || count < 1) throw new RangeError(`count must be a positive integer, got ${count}`);
  assertFinite("h", h);
  if (!(h > 0)) throw new RangeError(`h must be positive, got ${h}`);
  const w = new Float64Array(count);
  const sh = Math.sqrt(h);
  w[0] = (4 / 3) * sh;
  for (let j = 1; j < count; j++) {
    const jm = j - 1;
    const jp = j + 1;
    const rising = (2 / 3) * (j ** 1.5 - jm ** 1.5) - 2 * jm * (Math.sqrt(j) - Math.sqrt(jm));
    const falling = 2 * jp * (Math.sqrt(jp) - Math.sqrt(j)) - (2 / 3) * (jp ** 1.5 - j ** 1.5);
    w[j] = sh * (rising + falling);
  }
  return w;
}

/** Arguments of {@link lineSourceTraces}. */
export interface LineSourceArgs {
  /** Samples, `[trace][sample]`. */
  data: Float32Array;
  traceCount: number;
  sampleCount: number;
  /** Time of the first sample after the source instant, s. */
  startTimeS: number;
  sampleIntervalS: number;
  /** Source-receiver distance per trace, m. */
  distancesM: Float64Array;
  method: LineSourceMethod;
  /** Velocity of the single-velocity transformation, m/s (ignored by "direct-wave"). */
  velocityMps: number;
}

/**
 * Converts point-source traces to line-source traces; returns a new array (or fills `out`).
 * Samples at or before the source instant carry no wave of this source and are set to zero.
 */
export function lineSourceTraces(args: LineSourceArgs, out?: Float32Array): Float32Array {
  const { data, traceCount, sampleCount, startTimeS, sampleIntervalS: dt, distancesM, method, velocityMps } = args;
  assertTraceBlock(data, traceCount, sampleCount);
  assertFinite("startTimeS", startTimeS);
  assertFinite("sampleIntervalS", dt);
  if (!(dt > 0)) throw new RangeError(`sampleIntervalS must be positive, got ${dt}`);
  if (distancesM.length !== traceCount) throw new RangeError(`distancesM must hold ${traceCount} values, got ${distancesM.length}`);
  if (method !== "single-velocity" && method !== "direct-wave") throw new RangeError(`method must be "single-velocity" or "direct-wave", got ${String(method)}`);
  if (method === "single-velocity" && !(velocityMps > 0)) throw new RangeError(`velocityMps must be positive, got ${velocityMps}`);
  const result = out ?? new Float32Array(data.length);
  if (result.length !== data.length) throw new RangeError(`out must hold ${data.length} samples, got ${result.length}`);
  if (sampleCount === 0) return result;

  const plan = createFftPlan(nextPowerOfTwo(2 * sampleCount));
  plan.input.fill(0);
  plan.input.set(inverseSqrtTimeWeights(sampleCount, dt));
  forwardReal(plan);
  const kernelSpectrum = plan.spectrum.slice();
  const causal = new Float64Array(sampleCount);
  const converted = new Float64Array(sampleCount);
  // Time taper after the convolution: 1 (single velocity) or √2/√t (direct wave; times r per
  // trace); zero at and before the source instant, where no wave of this source can be.
  const taper = new Float64Array(sampleCount);
  for (let i = 0; i < sampleCount; i++) {
    const t = startTimeS + i * dt;
    taper[i] = t <= 0 ? 0 : method === "direct-wave" ? Math.SQRT2 / Math.sqrt(t) : 1;
  }
  for (let tr = 0; tr < traceCount; tr++) {
    const r = distancesM[tr];
    if (!(r >= 0)) throw new RangeError(`distancesM[${tr}] must be zero or positive, got ${r}`);
    const base = tr * sampleCount;
    // Samples before the source instant are dropped: they hold no signal of this source.
    for (let i = 0; i < sampleCount; i++) causal[i] = taper[i] === 0 ? 0 : data[base + i];
    convolveWithSpectrum(plan, kernelSpectrum, causal, sampleCount, converted);
    const scale = method === "direct-wave" ? r : Math.sqrt(2 * r * velocityMps);
    for (let i = 0; i < sampleCount; i++) result[base + i] = scale * taper[i] * converted[i];
  }
  return result;
}
