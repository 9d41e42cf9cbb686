/** Band-limited resampling used to bring solver traces to the field sampling. */
import { describe, expect, it } from "vitest";
import { resampleBandLimited } from "../../../../pipeline/kernels/resample";
import { ricker } from "../../../../pipeline/kernels/fd/wavelet";

describe("resampleBandLimited", () => {
  it("interpolates a band-limited wavelet onto a shifted, finer or coarser time axis", () => {
    // Reference: the analytic Ricker wavelet (Ricker 1953) at the output times. Windowed-sinc
    // interpolation of a signal well below Nyquist is accurate to about 1e-3 of the peak (common practice).
    const f = 30;
    const src = Float64Array.from({ length: 800 }, (_, k) => ricker(0.0001 + k * 0.00013, f, 0.05));
    for (const [t0, dt, n] of [
      [0.013, 0.00005, 1200], // finer, offset
      [-0.01, 0.0005, 180], // coarser (decimation with anti-alias), starting before the input
      [0.0001 + 0.5 * 0.00013, 0.00013, 700], // half-sample shift
    ] as const) {
      const out = resampleBandLimited(src, 0.0001, 0.00013, t0, dt, n);
      let err = 0;
      for (let k = 0; k < n; k++) {
        const t = t0 + k * dt;
        const expected = t < 0.0001 ? 0 : ricker(t, f, 0.05);
        err = Math.max(err, Math.abs(out[k] - expected));
      }
      expect(err).toBeLessThan(2e-3);
    }
  });

  it("rejects bad intervals", () => {
    expect(() => resampleBandLimited([1, 2], 0, 0, 0, 1, 2)).toThrow(/srcDtS/);
    expect(() => resampleBandLimited([1, 2], 0, 1, 0, -1, 2)).toThrow(/dstDtS/);
  });
});
