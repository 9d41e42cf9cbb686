import { describe, expect, it } from "vitest";
import Fili from "fili";
import {
  butterworthHighPass,
  butterworthLowPass,
  cascadeMagnitude,
  notchSection,
  runCascadeForward,
} from "../../../pipeline/kernels/butterworth";
import { filterTraces, mainsHumLines, planFrequencyFilter, type FrequencyFilterDesign } from "../../../pipeline/kernels/filter";
import { seededRandom } from "../../helpers/random";

const FS = 4000; // 0.25 ms sampling, as a typical engineering seismograph records
const DT = 1 / FS;

/** Handbook formula: Butterworth |H(f)|² = 1 / (1 + (f/fc)^(2n)) (analog low-pass). */
function analogLowPassPower(f: number, fc: number, n: number): number {
  return 1 / (1 + Math.pow(f / fc, 2 * n));
}

/** Same formula after the bilinear transform with prewarping: f/fc → tan(πf/fs)/tan(πfc/fs). */
function prewarpedLowPassPower(f: number, fc: number, n: number, fs: number): number {
  return 1 / (1 + Math.pow(Math.tan((Math.PI * f) / fs) / Math.tan((Math.PI * fc) / fs), 2 * n));
}

function design(over: Partial<FrequencyFilterDesign>): FrequencyFilterDesign {
  return {
    passBand: "band-pass",
    lowCutHz: 10,
    highCutHz: 200,
    order: 4,
    zeroPhase: true,
    notchesHz: [],
    notchWidthHz: 2,
    ...over,
  };
}

describe("Butterworth design against the handbook magnitude response", () => {
  it.each([1, 2, 3, 4, 5, 8])("low-pass order %i matches the prewarped formula to 1e-9", (n) => {
    const fc = 120;
    const sections = butterworthLowPass(n, fc, FS);
    let worst = 0;
    for (let f = 1; f < FS / 2; f += 7.3) {
      const h2 = cascadeMagnitude(sections, f, FS) ** 2;
      worst = Math.max(worst, Math.abs(h2 - prewarpedLowPassPower(f, fc, n, FS)));
    }
    // The bilinear transform maps the analog response exactly; only rounding remains.
    expect(worst).toBeLessThan(1e-9);
    // −3 dB at the corner: |H(fc)|² = 1/2 by the handbook formula.
    expect(cascadeMagnitude(sections, fc, FS) ** 2).toBeCloseTo(0.5, 12);
  });

  it("high-pass is the mirrored formula 1/(1 + (fc/f)^(2n))", () => {
    const n = 4;
    const fc = 8;
    const sections = butterworthHighPass(n, fc, FS);
    let worst = 0;
    for (let f = 0.5; f < FS / 2; f += 3.1) {
      const expected = 1 / (1 + Math.pow(Math.tan((Math.PI * fc) / FS) / Math.tan((Math.PI * f) / FS), 2 * n));
      worst = Math.max(worst, Math.abs(cascadeMagnitude(sections, f, FS) ** 2 - expected));
    }
    expect(worst).toBeLessThan(1e-9);
  });

  it("agrees with the analog handbook formula well below Nyquist within the warping error", () => {
    // Frequency warping: tan(x)/x − 1 ≈ x²/3 with x = πf/fs; up to fs/20 that is below 0.9 %,
    // so |H|² may differ by at most 2n · 0.9 % of |H|²(1 − |H|²) ≤ 2n · 0.9 % / 4 (n = 4: 1.8 %);
    // near the corner (100 Hz, x = 0.079) the warping is 0.2 %, so the bound there is 0.4 %.
    const n = 4;
    const fc = 100;
    const sections = butterworthLowPass(n, fc, FS);
    let worst = 0;
    for (let f = 1; f <= FS / 20; f += 1) {
      worst = Math.max(worst, Math.abs(cascadeMagnitude(sections, f, FS) ** 2 - analogLowPassPower(f, fc, n)));
    }
    expect(worst).toBeLessThan(0.002); // measured 0.0011
    expect(worst).toBeGreaterThan(0); // the digital filter is not the analog one
  });
});

describe("Butterworth against fili 2.0.3 (general-purpose DSP library, CalcCascades + IirFilter)", () => {
  const calc = new Fili.CalcCascades();

  it.each([
    ["lowpass", 2, 150],
    ["lowpass", 4, 60],
    ["lowpass", 8, 400],
    ["highpass", 4, 10],
    ["highpass", 6, 30],
  ] as const)("%s order %i at %i Hz: same magnitude response and same output", (kind, n, fc) => {
    // fili's "order" counts biquads, so our order n equals fili order n/2.
    const filiCascade = calc[kind]({ order: n / 2, characteristic: "butterworth", Fs: FS, Fc: fc });
    const filiFilter = new Fili.IirFilter(filiCascade);
    const ours = kind === "lowpass" ? butterworthLowPass(n, fc, FS) : butterworthHighPass(n, fc, FS);
    let worstMag = 0;
    for (let f = 0.25; f < FS / 2; f += 11.7) {
      const theirs = filiFilter.responsePoint({ Fs: FS, Fr: f }).magnitude;
      worstMag = Math.max(worstMag, Math.abs(cascadeMagnitude(ours, f, FS) - theirs));
    }
    expect(worstMag).toBeLessThan(1e-9);

    const rnd = seededRandom(7 + n);
    const input = rnd.fillGaussian(new Float64Array(2000));
    const theirsOut = filiFilter.multiStep(Array.from(input));
    const buf = Float64Array.from(input);
    runCascadeForward(ours, buf, 0, buf.length);
    let worst = 0;
    let peak = 0;
    for (let i = 0; i < buf.length; i++) {
      worst = Math.max(worst, Math.abs(buf[i] - theirsOut[i]));
      peak = Math.max(peak, Math.abs(theirsOut[i]));
    }
    // Same coefficients, different section order and form: only rounding differs.
    expect(worst / peak).toBeLessThan(1e-9);
  });

  it("notch equals fili's cookbook band-stop with Q = centre / width", () => {
    const coeffs = new Fili.IirCoeffs();
    const theirs = coeffs.bandstop({ Fs: FS, Fc: 50, Q: 50 / 2 });
    const ours = notchSection(50, 2, FS);
    expect(ours[0]).toBeCloseTo(theirs.b[0], 12);
    expect(ours[1]).toBeCloseTo(theirs.b[1], 12);
    expect(ours[2]).toBeCloseTo(theirs.b[2], 12);
    expect(ours[3]).toBeCloseTo(theirs.a[0], 12);
    expect(ours[4]).toBeCloseTo(theirs.a[1], 12);
  });
});

describe("filterTraces", () => {
  it("zero-phase: a symmetric pulse stays symmetric and unshifted", () => {
    const n = 2001;
    const centre = 1000;
    const data = new Float32Array(n);
    const fp = 60;
    for (let i = 0; i < n; i++) {
      const a = (Math.PI * fp * (i - centre) * DT) ** 2;
      data[i] = (1 - 2 * a) * Math.exp(-a); // Ricker pulse (symmetric)
    }
    const out = filterTraces({
      data,
      traceCount: 1,
      sampleCount: n,
      plan: planFrequencyFilter(design({ lowCutHz: 20, highCutHz: 90 }), DT, n),
      taperSamples: 40,
    });
    let peakIndex = 0;
    for (let i = 0; i < n; i++) if (Math.abs(out[i]) > Math.abs(out[peakIndex])) peakIndex = i;
    expect(peakIndex).toBe(centre);
    let asym = 0;
    for (let k = 1; k < 800; k++) asym = Math.max(asym, Math.abs(out[centre + k] - out[centre - k]));
    // Forward-backward filtering has zero phase (e.g. Gustafsson 1996 on forward-backward
    // filtering); what remains is float32 rounding and the far tails of the transient.
    expect(asym / Math.abs(out[centre])).toBeLessThan(1e-6); // measured 3e-10

    const causal = filterTraces({
      data,
      traceCount: 1,
      sampleCount: n,
      plan: planFrequencyFilter(design({ lowCutHz: 20, highCutHz: 90, zeroPhase: false }), DT, n),
      taperSamples: 40,
    });
    let causalPeak = 0;
    for (let i = 0; i < n; i++) if (Math.abs(causal[i]) > Math.abs(causal[causalPeak])) causalPeak = i;
    expect(causalPeak).toBeGreaterThan(centre); // a causal filter delays the pulse
  });

  it("zero-phase doubles the order: a sine at the corner comes out at half amplitude", () => {
    const n = 8000;
    const fc = 100;
    const data = new Float32Array(n);
    for (let i = 0; i < n; i++) data[i] = Math.sin(2 * Math.PI * fc * i * DT);
    const out = filterTraces({
      data,
      traceCount: 1,
      sampleCount: n,
      plan: planFrequencyFilter(design({ passBand: "low-pass", highCutHz: fc }), DT, n),
      taperSamples: 200,
    });
    // Steady-state amplitude in the middle: |H(fc)|² = 1/2 for forward-backward (handbook: the
    // squared magnitude of a −3 dB corner), where a single pass gives 1/√2.
    let amp = 0;
    for (let i = 3000; i < 5000; i++) amp = Math.max(amp, Math.abs(out[i]));
    expect(amp).toBeCloseTo(0.5, 3);
  });

  it("causal output equals fili's IirFilter on the same samples", () => {
    const n = 1500;
    const rnd = seededRandom(31);
    const data = rnd.fillGaussian(new Float32Array(n));
    const out = filterTraces({
      data,
      traceCount: 1,
      sampleCount: n,
      plan: planFrequencyFilter(design({ passBand: "high-pass", lowCutHz: 25, zeroPhase: false }), DT, n),
      taperSamples: 0,
    });
    const fili = new Fili.IirFilter(new Fili.CalcCascades().highpass({ order: 2, characteristic: "butterworth", Fs: FS, Fc: 25 }));
    const ref = fili.multiStep(Array.from(data));
    let worst = 0;
    for (let i = 0; i < n; i++) worst = Math.max(worst, Math.abs(out[i] - ref[i]));
    expect(worst).toBeLessThan(1e-5); // float32 output rounding of values of order 1
  });

  it("removes 50 Hz hum and its harmonics, keeps the signal between them", () => {
    const n = 16000;
    const data = new Float32Array(n);
    for (let i = 0; i < n; i++) {
      const t = i * DT;
      data[i] = Math.sin(2 * Math.PI * 50 * t) + 0.5 * Math.sin(2 * Math.PI * 150 * t) + Math.sin(2 * Math.PI * 75 * t);
    }
    const plan = planFrequencyFilter(
      design({ passBand: "none", notchesHz: mainsHumLines(50, 3, FS / 2), notchWidthHz: 2 }),
      DT,
      n,
    );
    const out = filterTraces({ data, traceCount: 1, sampleCount: n, plan, taperSamples: 400 });
    // What is left in the middle should be the 75 Hz line, scaled by the notches' (squared) response there.
    let gain75 = 1;
    for (const f of [50, 100, 150]) gain75 *= cascadeMagnitude(notchSection(f, 2, FS), 75, FS) ** 2;
    let worst = 0;
    for (let i = 6000; i < 10000; i++) {
      worst = Math.max(worst, Math.abs(out[i] - gain75 * Math.sin(2 * Math.PI * 75 * i * DT)));
    }
    // The notch zeros sit on the unit circle (cookbook design), so 50 and 150 Hz vanish in
    // steady state; 1e-3 of the hum amplitude allows for the decaying start-up transient.
    expect(worst).toBeLessThan(1e-3);
    expect(cascadeMagnitude(notchSection(50, 2, FS), 50, FS)).toBeLessThan(1e-12);
  });

  it("refuses corners at or above Nyquist with a message naming the corner", () => {
    expect(() => planFrequencyFilter(design({ highCutHz: 2000 }), DT, 100)).toThrow(/highCutHz 2000 Hz must lie below the Nyquist frequency 2000 Hz/);
    expect(() => planFrequencyFilter(design({ passBand: "high-pass", lowCutHz: 2500 }), DT, 100)).toThrow(/lowCutHz/);
    expect(() => planFrequencyFilter(design({ lowCutHz: 300, highCutHz: 200 }), DT, 100)).toThrow(/must lie below highCutHz/);
  });

  it("handles several traces independently and leaves the input untouched", () => {
    const rnd = seededRandom(5);
    const n = 700;
    const data = rnd.fillGaussian(new Float32Array(3 * n));
    const copy = data.slice();
    const plan = planFrequencyFilter(design({}), DT, n);
    const all = filterTraces({ data, traceCount: 3, sampleCount: n, plan, taperSamples: 20 });
    const second = filterTraces({ data: data.subarray(n, 2 * n), traceCount: 1, sampleCount: n, plan, taperSamples: 20 });
    expect(Array.from(all.subarray(n, 2 * n))).toEqual(Array.from(second));
    expect(data).toEqual(copy);
  });
});
