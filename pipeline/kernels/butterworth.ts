/**
 * Butterworth low-pass and high-pass filters and a mains-hum notch as cascades of second-order
 * sections (biquads), designed by the bilinear transform with frequency prewarping.
 *
 * A section is five coefficients `[b0, b1, b2, a1, a2]` of
 *   H(z) = (b0 + b1 z⁻¹ + b2 z⁻²) / (1 + a1 z⁻¹ + a2 z⁻²);
 * a cascade is a flat Float64Array of 5 · sectionCount coefficients.
 *
 * Analog prototype (handbook formula): the Butterworth filter of order n with corner ωc has
 * |H(jω)|² = 1 / (1 + (ω/ωc)^(2n)); its poles lie on the unit circle at
 * s_k = −sin θ_k ± j cos θ_k, θ_k = π (2k + 1) / (2n), k = 0 … ⌊n/2⌋ − 1, plus s = −1 when n is
 * odd. Each conjugate pair gives the section 1 / (s² + s/Q_k + 1) with Q_k = 1 / (2 sin θ_k).
 *
 * Bilinear transform with prewarping: s = (1/K) (1 − z⁻¹)/(1 + z⁻¹), K = tan(π fc / fs), maps the
 * analog corner exactly onto fc, so the digital response is
 *   |H(f)|² = 1 / (1 + (tan(π f / fs) / tan(π fc / fs))^(2n))   (low-pass),
 * which equals the analog formula at f ≪ fs and falls to zero at Nyquist.
 */
import { assertCount, assertFinite } from "./taper";

/** Coefficients per second-order section. */
export const SECTION_STRIDE = 5;

function checkCorner(name: string, cornerHz: number, sampleRateHz: number): void {
  assertFinite(name, cornerHz);
  assertFinite("sampleRateHz", sampleRateHz);
  if (!(sampleRateHz > 0)) throw new RangeError(`sampleRateHz must be positive, got ${sampleRateHz}`);
  if (!(cornerHz > 0) || cornerHz >= sampleRateHz / 2) {
    throw new RangeError(
      `${name} must lie between 0 and the Nyquist frequency ${sampleRateHz / 2} Hz, got ${cornerHz} Hz`,
    );
  }
}

function checkOrder(order: number): void {
  if (!Number.isInteger(order) || order < 1 || order > 16) {
    throw new RangeError(`order must be an integer from 1 to 16, got ${String(order)}`);
  }
}

/** Number of biquad sections a Butterworth filter of `order` needs: ⌈order / 2⌉. */
export function butterworthSectionCount(order: number): number {
  checkOrder(order);
  return Math.ceil(order / 2);
}

function butterworth(kind: "low" | "high", order: number, cornerHz: number, sampleRateHz: number): Float64Array {
  checkOrder(order);
  checkCorner("cornerHz", cornerHz, sampleRateHz);
  const k = Math.tan((Math.PI * cornerHz) / sampleRateHz);
  const k2 = k * k;
  const pairs = Math.floor(order / 2);
  const sections = new Float64Array(SECTION_STRIDE * Math.ceil(order / 2));
  for (let p = 0; p < pairs; p++) {
    const theta = (Math.PI * (2 * p + 1)) / (2 * order);
    const invQ = 2 * Math.sin(theta);
    const norm = 1 / (1 + k * invQ + k2);
    const o = SECTION_STRIDE * p;
    if (kind === "low") {
      sections[o] = k2 * norm;
      sections[o + 1] = 2 * k2 * norm;
      sections[o + 2] = k2 * norm;
    } else {
      sections[o] = norm;
      sections[o + 1] = -2 * norm;
      sections[o + 2] = norm;
    }
    sections[o + 3] = 2 * (k2 - 1) * norm;
    sections[o + 4] = (1 - k * invQ + k2) * norm;
  }
  if (order % 2 === 1) {
    // Real pole s = −1: 1/(s + 1) (low) or s/(s + 1) (high), as a section with b2 = a2 = 0.
    const norm = 1 / (1 + k);
    const o = SECTION_STRIDE * pairs;
    if (kind === "low") {
      sections[o] = k * norm;
      sections[o + 1] = k * norm;
    } else {
      sections[o] = norm;
      sections[o + 1] = -norm;
    }
    sections[o + 2] = 0;
    sections[o + 3] = (k - 1) * norm;
    sections[o + 4] = 0;
  }
  return sections;
}

/**
 * Butterworth low-pass of `order` (1 … 16) with −3 dB corner `cornerHz`, as biquad sections.
 * @param sampleRateHz sampling rate, Hz; the corner must lie below its half (Nyquist).
 */
export function butterworthLowPass(order: number, cornerHz: number, sampleRateHz: number): Float64Array {
  return butterworth("low", order, cornerHz, sampleRateHz);
}

/** Butterworth high-pass of `order` (1 … 16) with −3 dB corner `cornerHz`, as biquad sections. */
export function butterworthHighPass(order: number, cornerHz: number, sampleRateHz: number): Float64Array {
  return butterworth("high", order, cornerHz, sampleRateHz);
}

/**
 * Second-order notch at `centreHz` with −3 dB width `widthHz` (Q = centre / width): the analog
 * notch (s² + 1)/(s² + s/Q + 1) through the bilinear transform, as in R. Bristow-Johnson's
 * "Audio EQ Cookbook" (zeros on the unit circle at ±2π centre/fs, so the centre is removed exactly).
 */
export function notchSection(centreHz: number, widthHz: number, sampleRateHz: number): Float64Array {
  checkCorner("centreHz", centreHz, sampleRateHz);
  assertFinite("widthHz", widthHz);
  if (!(widthHz > 0) || widthHz >= centreHz) {
    throw new RangeError(`widthHz must be positive and below the centre ${centreHz} Hz, got ${widthHz}`);
  }
  const w0 = (2 * Math.PI * centreHz) / sampleRateHz;
  const alpha = Math.sin(w0) / (2 * (centreHz / widthHz));
  const norm = 1 / (1 + alpha);
  const c = Math.cos(w0);
  return Float64Array.of(norm, -2 * c * norm, norm, -2 * c * norm, (1 - alpha) * norm);
}

/** Concatenates cascades into one. */
export function concatSections(...cascades: Float64Array[]): Float64Array {
  let n = 0;
  for (const c of cascades) {
    if (c.length % SECTION_STRIDE !== 0) throw new RangeError(`a cascade must hold 5 coefficients per section, got ${c.length}`);
    n += c.length;
  }
  const out = new Float64Array(n);
  let o = 0;
  for (const c of cascades) {
    out.set(c, o);
    o += c.length;
  }
  return out;
}

/**
 * Magnitude |H(f)| of a cascade at `frequencyHz`, evaluated on the unit circle z = e^{j 2π f/fs}.
 */
export function cascadeMagnitude(sections: Float64Array, frequencyHz: number, sampleRateHz: number): number {
  const w = (2 * Math.PI * frequencyHz) / sampleRateHz;
  const c1 = Math.cos(w);
  const s1 = -Math.sin(w);
  const c2 = Math.cos(2 * w);
  const s2 = -Math.sin(2 * w);
  let mag = 1;
  for (let o = 0; o < sections.length; o += SECTION_STRIDE) {
    const nr = sections[o] + sections[o + 1] * c1 + sections[o + 2] * c2;
    const ni = sections[o + 1] * s1 + sections[o + 2] * s2;
    const dr = 1 + sections[o + 3] * c1 + sections[o + 4] * c2;
    const di = sections[o + 3] * s1 + sections[o + 4] * s2;
    mag *= Math.sqrt((nr * nr + ni * ni) / (dr * dr + di * di));
  }
  return mag;
}

/**
 * Complex response H(f) of a cascade at `frequencyHz` (z = e^{j 2π f/fs}), as [re, im]; negative
 * frequencies give the conjugate.
 */
export function cascadeResponse(sections: Float64Array, frequencyHz: number, sampleRateHz: number): [number, number] {
  const w = (2 * Math.PI * frequencyHz) / sampleRateHz;
  const c1 = Math.cos(w);
  const s1 = -Math.sin(w);
  const c2 = Math.cos(2 * w);
  const s2 = -Math.sin(2 * w);
  let re = 1;
  let im = 0;
  for (let o = 0; o < sections.length; o += SECTION_STRIDE) {
    const nr = sections[o] + sections[o + 1] * c1 + sections[o + 2] * c2;
    const ni = sections[o + 1] * s1 + sections[o + 2] * s2;
    const dr = 1 + sections[o + 3] * c1 + sections[o + 4] * c2;
    const di = sections[o + 3] * s1 + sections[o + 4] * s2;
    // (nr + j ni) / (dr + j di)
    const d = dr * dr + di * di;
    const qr = (nr * dr + ni * di) / d;
    const qi = (ni * dr - nr * di) / d;
    const r = re * qr - im * qi;
    im = re * qi + im * qr;
    re = r;
  }
  return [re, im];
}

/**
 * Runs the cascade over `buffer[offset … offset + count)` in place, forward in time
 * (transposed direct form II, zero initial state). Float64 keeps low corners (fc/fs ~ 10⁻³)
 * stable, where the poles lie close to z = 1.
 */
export function runCascadeForward(sections: Float64Array, buffer: Float64Array, offset: number, count: number): void {
  const end = offset + count;
  for (let o = 0; o < sections.length; o += SECTION_STRIDE) {
    const b0 = sections[o];
    const b1 = sections[o + 1];
    const b2 = sections[o + 2];
    const a1 = sections[o + 3];
    const a2 = sections[o + 4];
    let z1 = 0;
    let z2 = 0;
    for (let i = offset; i < end; i++) {
      const x = buffer[i];
      const y = b0 * x + z1;
      z1 = b1 * x - a1 * y + z2;
      z2 = b2 * x - a2 * y;
      buffer[i] = y;
    }
  }
}

/** Runs the cascade over `buffer[offset … offset + count)` in place, backward in time. */
export function runCascadeBackward(sections: Float64Array, buffer: Float64Array, offset: number, count: number): void {
  for (let o = 0; o < sections.length; o += SECTION_STRIDE) {
    const b0 = sections[o];
    const b1 = sections[o + 1];
    const b2 = sections[o + 2];
    const a1 = sections[o + 3];
    const a2 = sections[o + 4];
    let z1 = 0;
    let z2 = 0;
    for (let i = offset + count - 1; i >= offset; i--) {
      const x = buffer[i];
      const y = b0 * x + z1;
      z1 = b1 * x - a1 * y + z2;
      z2 = b2 * x - a2 * y;
      buffer[i] = y;
    }
  }
}

/** Validates a cascade passed across a boundary (worker task, caller). */
export function assertSections(sections: Float64Array): void {
  if (!(sections instanceof Float64Array) || sections.length % SECTION_STRIDE !== 0) {
    throw new TypeError(`sections must be a Float64Array of 5 coefficients per section`);
  }
  assertCount("sectionCount", sections.length / SECTION_STRIDE);
}
