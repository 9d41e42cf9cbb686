/**
 * Dispersion image by the phase-shift method (Park, Miller & Xia 1998, "Imaging dispersion curves
 * of surface waves on multi-channel record", SEG Expanded Abstracts): the spectra U(x, ω) of the
 * traces, normalised to unit amplitude, are phase-shifted for each trial phase velocity c and
 * summed over offset: image(ω, c) = |Σₓ exp(iωx/c)·U(x, ω)/|U(x, ω)||. A wave travelling away
 * from the source at c has U ∝ exp(−iωx/c) (spectrum convention ∫u(t)e^{−iωt}dt), so the sum is
 * coherent, and largest, at the trial velocity equal to its phase velocity.
 *
 * The spectra are evaluated by a direct Fourier sum at the requested frequencies (any frequency
 * step, no padding), with the phasor advanced by a complex rotation per sample.
 *
 * Layouts: traces flat `[trace][sample]`; image flat `[frequency][velocity]`. Units: s, m, Hz, m/s.
 */

/** The axes of a dispersion image. */
export interface DispersionAxes {
  /** Frequencies, Hz, increasing. */
  frequenciesHz: Float64Array;
  /** Trial phase velocities, m/s, increasing. */
  velocitiesMps: Float64Array;
}

/** Evenly spaced axis from `start` to at most `stop` (inclusive within 1e-9 of a step) with `step`. */
export function evenAxis(start: number, stop: number, step: number, name: string): Float64Array {
  if (!(step > 0)) throw new RangeError(`${name} step must be > 0, got ${step}`);
  if (!(stop >= start)) throw new RangeError(`${name} end (${stop}) must not be below its start (${start})`);
  const n = Math.floor((stop - start) / step + 1e-9) + 1;
  const out = new Float64Array(n);
  for (let i = 0; i < n; i++) out[i] = start + i * step;
  return out;
}

/**
 * Unit-amplitude spectra of the selected traces at the given frequencies, flat
 * `[trace][frequency]` as interleaved (re, im) pairs: length 2 · traces · frequencies. A trace
 * with zero amplitude at a frequency contributes zero there.
 */
export function unitSpectra(
  data: ArrayLike<number>,
  sampleCount: number,
  sampleIntervalS: number,
  startTimeS: number,
  traceRows: ArrayLike<number>,
  frequenciesHz: ArrayLike<number>,
): Float64Array {
  if (!Number.isInteger(sampleCount) || sampleCount < 2) throw new RangeError(`sampleCount must be an integer ≥ 2, got ${sampleCount}`);
  if (!(sampleIntervalS > 0)) throw new RangeError(`sampleIntervalS must be > 0, got ${sampleIntervalS}`);
  const nf = frequenciesHz.length;
  const nt = traceRows.length;
  const out = new Float64Array(2 * nt * nf);
  for (let q = 0; q < nf; q++) {
    const f = frequenciesHz[q];
    if (!(f >= 0 && f <= 0.5 / sampleIntervalS)) throw new RangeError(`frequenciesHz[${q}] must lie in [0, Nyquist ${0.5 / sampleIntervalS} Hz], got ${f}`);
    const w = 2 * Math.PI * f;
    // e^{−iω t_n}, t_n = startTimeS + n·dt, advanced by the rotation e^{−iω dt}.
    const rotRe = Math.cos(w * sampleIntervalS);
    const rotIm = -Math.sin(w * sampleIntervalS);
    const p0Re = Math.cos(w * startTimeS);
    const p0Im = -Math.sin(w * startTimeS);
    for (let t = 0; t < nt; t++) {
      const row = traceRows[t];
      const base = row * sampleCount;
      if (!Number.isInteger(row) || row < 0 || base + sampleCount > data.length) throw new RangeError(`traceRows[${t}] = ${row} is outside the data`);
      let pRe = p0Re;
      let pIm = p0Im;
      let re = 0;
      let im = 0;
      for (let n = 0; n < sampleCount; n++) {
        const v = data[base + n];
        re += v * pRe;
        im += v * pIm;
        const nRe = pRe * rotRe - pIm * rotIm;
        pIm = pRe * rotIm + pIm * rotRe;
        pRe = nRe;
      }
      const a = Math.hypot(re, im);
      const k = 2 * (t * nf + q);
      if (a > 0) {
        out[k] = re / a;
        out[k + 1] = im / a;
      }
    }
  }
  return out;
}

/**
 * Adds the phase-shift image of one set of traces to `image` (flat `[frequency][velocity]`):
 * image(ω, c) += |Σₓ exp(iωx/c)·Û(x, ω)| / N with Û the unit spectra from {@link unitSpectra}
 * (`[trace][frequency]` complex pairs), x the distances from the source, m (|offset|), and N the
 * number of traces, so one coherent set adds at most 1.
 */
export function addPhaseShiftImage(
  spectra: Float64Array,
  distancesM: ArrayLike<number>,
  axes: DispersionAxes,
  image: Float32Array | Float64Array,
): void {
  const { frequenciesHz, velocitiesMps } = axes;
  const nf = frequenciesHz.length;
  const nc = velocitiesMps.length;
  const nt = distancesM.length;
  if (spectra.length !== 2 * nt * nf) throw new RangeError(`spectra has ${spectra.length} values, expected 2 · ${nt} traces · ${nf} frequencies`);
  if (image.length !== nf * nc) throw new RangeError(`image has ${image.length} cells, expected ${nf} · ${nc}`);
  for (let j = 0; j < nc; j++) {
    if (!(velocitiesMps[j] > 0)) throw new RangeError(`velocitiesMps[${j}] must be > 0, got ${velocitiesMps[j]}`);
  }
  if (nt === 0) return;
  for (let q = 0; q < nf; q++) {
    const w = 2 * Math.PI * frequenciesHz[q];
    for (let j = 0; j < nc; j++) {
      const kc = w / velocitiesMps[j];
      let re = 0;
      let im = 0;
      for (let t = 0; t < nt; t++) {
        const ph = kc * distancesM[t];
        const c = Math.cos(ph);
        const s = Math.sin(ph);
        const k = 2 * (t * nf + q);
        const ur = spectra[k];
        const ui = spectra[k + 1];
        re += c * ur - s * ui;
        im += c * ui + s * ur;
      }
      image[q * nc + j] += Math.hypot(re, im) / nt;
    }
  }
}

/** Divides each frequency row of `image` (`[frequency][velocity]`) by its maximum (rows of zeros stay zero). */
export function normalisePerFrequency(image: Float32Array | Float64Array, frequencyCount: number, velocityCount: number): void {
  if (image.length !== frequencyCount * velocityCount) throw new RangeError(`image has ${image.length} cells, expected ${frequencyCount} · ${velocityCount}`);
  for (let q = 0; q < frequencyCount; q++) {
    let max = 0;
    for (let j = 0; j < velocityCount; j++) max = Math.max(max, image[q * velocityCount + j]);
    if (max > 0) for (let j = 0; j < velocityCount; j++) image[q * velocityCount + j] /= max;
  }
}

/** One set of traces (one shot's traces in the offset window) for {@link phaseShiftImage}. */
export interface PhaseShiftInput {
  /** Samples, flat `[trace][sample]`. */
  data: ArrayLike<number>;
  sampleCount: number;
  sampleIntervalS: number;
  /** Time of the first sample, s. */
  startTimeS: number;
  /** Rows of `data` to use. */
  traceRows: ArrayLike<number>;
  /** Distance of each used trace from its source, m (|offset|), same order as traceRows. */
  distancesM: ArrayLike<number>;
}

/**
 * Dispersion image of one or several shots stacked: the mean over the shots of each shot's
 * phase-shift image (each in [0, 1]), then, when `perFrequency`, each frequency row divided by
 * its maximum. Returns a flat `[frequency][velocity]` Float32Array.
 */
export function phaseShiftImage(shots: PhaseShiftInput[], axes: DispersionAxes, perFrequency: boolean): Float32Array {
  const nf = axes.frequenciesHz.length;
  const nc = axes.velocitiesMps.length;
  const acc = new Float64Array(nf * nc);
  let used = 0;
  for (const s of shots) {
    if (s.traceRows.length !== s.distancesM.length) throw new RangeError(`traceRows has ${s.traceRows.length} entries, distancesM ${s.distancesM.length}`);
    if (s.traceRows.length === 0) continue;
    const spectra = unitSpectra(s.data, s.sampleCount, s.sampleIntervalS, s.startTimeS, s.traceRows, axes.frequenciesHz);
    addPhaseShiftImage(spectra, s.distancesM, axes, acc);
    used++;
  }
  if (used > 1) for (let i = 0; i < acc.length; i++) acc[i] /= used;
  if (perFrequency) normalisePerFrequency(acc, nf, nc);
  return Float32Array.from(acc);
}
