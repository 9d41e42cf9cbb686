import { describe, expect, it } from "vitest";
import { butterworthLowPass, runCascadeBackward, runCascadeForward } from "../../../pipeline/kernels/butterworth";
import { hilbertTransform } from "../../../pipeline/kernels/hilbert";
import { INVERSION_MEASURES, misfitAndAdjoint, type InversionMeasure, type MisfitAdjointArgs } from "../../../pipeline/kernels/misfit-adjoint";
import { traceMisfits } from "../../../pipeline/kernels/misfit";
import { seededRandom } from "../../helpers/random";

const TRACES = 3;
const SAMPLES = 256;
const FIRST = 30;
const END = 220;

/** Seeded band-limited traces: Gaussian noise through a zero-phase 6th-order Butterworth low pass at 0.1 of the sample rate. */
function bandLimited(seed: number): Float32Array {
  const random = seededRandom(seed);
  const sections = butterworthLowPass(6, 100, 1000);
  const out = new Float32Array(TRACES * SAMPLES);
  const buffer = new Float64Array(SAMPLES);
  for (let t = 0; t < TRACES; t++) {
    random.fillGaussian(buffer);
    runCascadeForward(sections, buffer, 0, SAMPLES);
    runCascadeBackward(sections, buffer, 0, SAMPLES);
    for (let k = 0; k < SAMPLES; k++) out[t * SAMPLES + k] = buffer[k];
  }
  return out;
}

function args(measure: InversionMeasure, synthetic: Float32Array, observed: Float32Array): MisfitAdjointArgs {
  return {
    measure,
    synthetic,
    observed,
    traceCount: TRACES,
    sampleCount: SAMPLES,
    weights: new Float32Array([1, 0.5, 2]),
    firstSample: FIRST,
    endSample: END,
  };
}

describe("adjoint sources against finite differences", () => {
  // Reference: the central difference (J(s + h e_k) − J(s − h e_k)) / (2h) of the measure itself,
  // second-order accurate. The step h is 1e-3 of the trace's rms, and the actual step is read back
  // from the float32 samples so the rounding of s ± h to float32 does not enter the quotient; the
  // measure is summed in float64, so cancellation costs about 1e-16·J/h ≈ 1e-12 of the derivative.
  // Tolerance 1e-3 relative (the brief), measured against the trace's largest derivative so that
  // samples where the derivative crosses zero do not turn a small absolute error into a large ratio.
  const synthetic = bandLimited(11);
  const observed = bandLimited(12);
  for (const measure of INVERSION_MEASURES) {
    it(`${measure}: ∂J/∂s_k matches the central difference within 1e-3`, () => {
      const { adjoint } = misfitAndAdjoint(args(measure, synthetic, observed));
      const random = seededRandom(99);
      let worst = 0;
      for (let t = 0; t < TRACES; t++) {
        let rms = 0;
        for (let k = 0; k < SAMPLES; k++) rms += synthetic[t * SAMPLES + k] ** 2;
        rms = Math.sqrt(rms / SAMPLES);
        const fd = new Float64Array(SAMPLES);
        // Every fourth sample, across the whole trace (the envelope's adjoint reaches outside the window).
        const picks: number[] = [];
        for (let k = 1 + Math.floor(random.uniform() * 3); k < SAMPLES; k += 4) picks.push(k);
        for (const k of picks) {
          const i = t * SAMPLES + k;
          const plus = synthetic.slice();
          const minus = synthetic.slice();
          plus[i] = synthetic[i] + 1e-3 * rms;
          minus[i] = synthetic[i] - 1e-3 * rms;
          const jp = misfitAndAdjoint(args(measure, plus, observed)).misfit;
          const jm = misfitAndAdjoint(args(measure, minus, observed)).misfit;
          fd[k] = (jp - jm) / (plus[i] - minus[i]);
        }
        let scale = 0;
        for (const k of picks) scale = Math.max(scale, Math.abs(fd[k]));
        expect(scale).toBeGreaterThan(0);
        for (const k of picks) {
          const err = Math.abs(adjoint[t * SAMPLES + k] - fd[k]) / scale;
          worst = Math.max(worst, err);
          expect(err, `trace ${t} sample ${k}`).toBeLessThan(1e-3);
        }
        // Where the derivative is large, also sample by sample.
        for (const k of picks) {
          if (Math.abs(fd[k]) > 0.1 * scale) expect(Math.abs(adjoint[t * SAMPLES + k] - fd[k]) / Math.abs(fd[k])).toBeLessThan(1e-3);
        }
      }
      expect(worst).toBeLessThan(1e-3);
    });
  }

  it("leaves zero-weight traces and, except for the envelope, samples outside the window at zero", () => {
    for (const measure of INVERSION_MEASURES) {
      const a = { ...args(measure, synthetic, observed), weights: new Float32Array([1, 0, 1]) };
      const { adjoint, traceMisfits: per } = misfitAndAdjoint(a);
      expect(per[1]).toBe(0);
      for (let k = 0; k < SAMPLES; k++) expect(adjoint[SAMPLES + k]).toBe(0);
      if (measure !== "envelope") {
        for (let k = 0; k < FIRST; k++) expect(adjoint[k]).toBe(0);
        for (let k = END; k < SAMPLES; k++) expect(adjoint[k]).toBe(0);
      }
    }
  });
});

describe("misfit values agree with the misfit step (pipeline/kernels/misfit.ts)", () => {
  const synthetic = bandLimited(21);
  const observed = bandLimited(22);
  const weights = new Float32Array([1, 0.5, 2]);
  const cases: [InversionMeasure, "least-squares" | "normalised-correlation" | "envelope", boolean][] = [
    ["least-squares", "least-squares", false],
    ["trace-normalised-least-squares", "least-squares", true],
    ["normalised-correlation", "normalised-correlation", true],
    ["envelope", "envelope", true],
  ];
  for (const [measure, stepMeasure, normaliseTraces] of cases) {
    it(`${measure} equals weight × misfit.ts "${stepMeasure}"${stepMeasure === "least-squares" ? ` (normaliseTraces ${normaliseTraces})` : ""}`, () => {
      const ours = misfitAndAdjoint(args(measure, synthetic, observed));
      const theirs = traceMisfits({ synthetic, observed, traceCount: TRACES, sampleCount: SAMPLES, measure: stepMeasure, normaliseTraces, firstSample: FIRST, endSample: END });
      let total = 0;
      for (let t = 0; t < TRACES; t++) {
        // Both sum float64 products of the same float32 samples, in the same order up to the
        // weight: agreement to rounding (1e-12 relative).
        expect(ours.traceMisfits[t]).toBeCloseTo(weights[t] * theirs[t], 10);
        expect(Math.abs(ours.traceMisfits[t] - weights[t] * theirs[t])).toBeLessThanOrEqual(1e-12 * Math.abs(theirs[t]) * weights[t]);
        total += ours.traceMisfits[t];
      }
      expect(ours.misfit).toBeCloseTo(total, 12);
    });
  }

  it("trace-normalised least squares and normalised correlation are one function: ½‖ŝ − d̂‖² = 1 − ŝ·d̂ (algebra)", () => {
    const a = misfitAndAdjoint(args("trace-normalised-least-squares", synthetic, observed));
    const b = misfitAndAdjoint(args("normalised-correlation", synthetic, observed));
    for (let t = 0; t < TRACES; t++) expect(Math.abs(a.traceMisfits[t] - b.traceMisfits[t])).toBeLessThan(1e-12);
  });

  it("refuses an unknown measure and a window outside the trace", () => {
    expect(() => misfitAndAdjoint({ ...args("least-squares", synthetic, observed), measure: "l1" as InversionMeasure })).toThrow(RangeError);
    expect(() => misfitAndAdjoint({ ...args("least-squares", synthetic, observed), endSample: SAMPLES + 1 })).toThrow(/window/);
    expect(() => misfitAndAdjoint({ ...args("least-squares", synthetic, observed), weights: new Float32Array([1, -1, 1]) })).toThrow(/weights\[1\]/);
  });
});

describe("the Hilbert transform behind the envelope adjoint", () => {
  it("is anti-self-adjoint, ⟨H x, y⟩ = −⟨x, H y⟩ (Titchmarsh; Bracewell, The Fourier Transform and Its Applications), which gives the minus sign of the envelope adjoint", () => {
    const random = seededRandom(31);
    const x = random.fillGaussian(new Float64Array(SAMPLES));
    const y = random.fillGaussian(new Float64Array(SAMPLES));
    const hx = hilbertTransform(x);
    const hy = hilbertTransform(y);
    let a = 0;
    let b = 0;
    let scale = 0;
    for (let k = 0; k < SAMPLES; k++) {
      a += hx[k] * y[k];
      b += x[k] * hy[k];
      scale += Math.abs(hx[k] * y[k]);
    }
    // The padded discrete transform keeps the property exactly (odd multiplier −i·sign f; padding and
    // truncation are transposes): rounding only, 1e-12 of the sum of magnitudes.
    expect(Math.abs(a + b)).toBeLessThan(1e-12 * scale);
  });
});
