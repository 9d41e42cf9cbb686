import { describe, expect, it } from "vitest";
import { agcTraces, normaliseTraces, timePowerTraces } from "../../../pipeline/kernels/gain";
import { applyMutes, linearMuteLine } from "../../../pipeline/kernels/mute";
import { editTraces, TRACE_KEEP, TRACE_KILL, TRACE_REVERSE } from "../../../pipeline/kernels/trace-edit";
import { seededRandom } from "../../helpers/random";

describe("gain", () => {
  it("normalises by maximum and by RMS, and the returned scales undo it", () => {
    const rnd = seededRandom(1);
    const data = rnd.fillGaussian(new Float32Array(3 * 500), 7);
    data.fill(0, 1000, 1500); // a dead trace stays dead with scale 1
    const copy = data.slice();
    const byMax = normaliseTraces(data, 3, 500, "max");
    const byRms = normaliseTraces(data, 3, 500, "rms");
    let max0 = 0;
    let sq1 = 0;
    for (let i = 0; i < 500; i++) {
      max0 = Math.max(max0, Math.abs(byMax.data[i]));
      sq1 += byRms.data[500 + i] ** 2;
    }
    expect(max0).toBeCloseTo(1, 6);
    expect(Math.sqrt(sq1 / 500)).toBeCloseTo(1, 5);
    expect(byMax.scales[2]).toBe(1);
    for (let i = 0; i < 1000; i++) expect(byMax.data[i] / byMax.scales[Math.floor(i / 500)]).toBeCloseTo(copy[i], 4);
    expect(data).toEqual(copy);
  });

  it("AGC brings a sine of any amplitude to RMS 1, i.e. peak √2 (RMS of a sine is A/√2, handbook)", () => {
    const n = 4000;
    const dt = 0.00025;
    const data = new Float32Array(2 * n);
    for (let i = 0; i < n; i++) {
      const s = Math.sin(2 * Math.PI * 50 * i * dt);
      data[i] = 0.003 * s;
      data[n + i] = 250 * s;
    }
    // A window of exactly 4 periods of 50 Hz (320 samples) holds whole periods, so the windowed RMS is exact.
    const out = agcTraces(data, 2, n, 321);
    for (const t of [0, 1]) {
      let peak = 0;
      for (let i = 1000; i < 3000; i++) peak = Math.max(peak, Math.abs(out[t * n + i]));
      expect(peak).toBeCloseTo(Math.SQRT2, 2);
    }
  });

  it("time-power gain multiplies by t^p from the source instant", () => {
    const data = new Float32Array(10).fill(1);
    const out = timePowerTraces(data, 1, 10, -0.002, 0.001, 2);
    expect(out[0]).toBe(0);
    expect(out[2]).toBe(0);
    expect(out[7]).toBeCloseTo(0.005 ** 2, 10);
    expect(() => timePowerTraces(data, 1, 10, 0, 0.001, -1)).toThrow(/power must be zero or positive, got -1/);
  });
});

describe("mute", () => {
  it("zeroes before a top line with a cosine taper on the muted side, leaves the rest", () => {
    const n = 200;
    const dt = 0.001;
    const data = new Float32Array(2 * n).fill(1);
    const top = linearMuteLine([10, -40], 0.01, 1000); // 20 ms and 50 ms
    expect(Array.from(top)).toEqual([Math.fround(0.02), Math.fround(0.05)]);
    const { data: out, mutedTraces } = applyMutes(data, 2, n, 0, dt, { top }, 0.01);
    expect(mutedTraces).toBe(2);
    // Trace 0: line at sample 20, taper 10 samples: zero up to sample 10, ramp, one from 20 on.
    for (let i = 0; i <= 10; i++) expect(out[i]).toBe(0);
    expect(out[15]).toBeCloseTo(0.5, 5); // half-way up a cosine ramp, 0.5 · (1 − cos(π/2))
    for (let i = 20; i < n; i++) expect(out[i]).toBe(1);
    expect(out[n + 45]).toBeCloseTo(0.5, 5);
  });

  it("bottom line and surgical window; NaN means no line", () => {
    const n = 100;
    const data = new Float32Array(2 * n).fill(2);
    const bottom = Float32Array.of(0.05, NaN);
    const windows = [{ start: Float32Array.of(NaN, 0.02), end: Float32Array.of(NaN, 0.04) }];
    const { data: out, mutedTraces } = applyMutes(data, 2, n, 0, 0.001, { bottom, windows }, 0);
    expect(mutedTraces).toBe(2);
    expect(out[50]).toBe(2);
    expect(out[51]).toBe(0);
    expect(out[n + 19]).toBe(2);
    expect(out[n + 20]).toBe(0);
    expect(out[n + 40]).toBe(0);
    expect(out[n + 41]).toBe(2);
  });
});

describe("trace edits", () => {
  it("kills, reverses and keeps per trace", () => {
    const data = Float32Array.of(1, 2, 3, 4, 5, 6);
    const out = editTraces(data, 3, 2, Uint8Array.of(TRACE_KILL, TRACE_REVERSE, TRACE_KEEP));
    expect(Array.from(out)).toEqual([0, 0, -3, -4, 5, 6]);
    expect(() => editTraces(data, 3, 2, Uint8Array.of(0, 7, 0))).toThrow(/actions\[1\]/);
  });
});
