/**
 * Field checks of raw shot records, quick enough to run on a field laptop between two blows:
 * dead and noisy traces, reversed polarity, trigger timing slips, source position slips
 * (asymmetric move-out of the first arrivals), mains hum and clipped samples.
 *
 * Every function here is pure and works on flat row-major trace blocks `[trace][sample]`
 * (Float32Array, length traceCount · sampleCount). Methods:
 * - RMS levels against the median of neighbouring traces, robust statistics by the median and the
 *   median absolute deviation (Hampel 1974, J. Am. Stat. Assoc. 69; MAD scaled by 1.4826 for a
 *   normal distribution, Rousseeuw & Croux 1993, J. Am. Stat. Assoc. 88).
 * - Noise measured before the earliest possible first arrival (|offset| / fastest velocity):
 *   common practice.
 * - Polarity: sign of the normalised cross-correlation with neighbouring traces at the lag of its
 *   largest magnitude, lag bounded by the move-out at the slowest velocity: common practice.
 * - Source position: the point about which the record's move-out is most symmetric (mirrored
 *   trace pairs correlated); a source logged at the wrong position shows as an asymmetric
 *   move-out: common practice of geometry checks, the symmetry measure is ours.
 * - Trigger timing: the lag of a record's cross-correlation with the other blows at the same
 *   source position: common practice.
 * - Line levels by a Hann-windowed discrete Fourier transform at the line frequency against the
 *   mean power of the bins beside it (Harris 1978, Proc. IEEE 66: Hann coherent gain ½,
 *   noise power Σw² = 3N/8).
 * - Clipping: runs of samples at the trace's largest magnitude: common practice.
 */
import { assertCount, assertFinite, assertTraceBlock } from "./taper";

/** Median of the finite values of `values` (NaN when there are none). Does not modify the input. */
export function median(values: ArrayLike<number>): number {
  const v: number[] = [];
  for (let i = 0; i < values.length; i++) if (Number.isFinite(values[i])) v.push(values[i]);
  if (v.length === 0) return NaN;
  v.sort((a, b) => a - b);
  const m = v.length >> 1;
  return v.length % 2 ? v[m] : 0.5 * (v[m - 1] + v[m]);
}

/**
 * Median absolute deviation about the median, scaled by 1.4826 so it estimates the standard
 * deviation of normally distributed values (Rousseeuw & Croux 1993).
 */
export function scaledMad(values: ArrayLike<number>): number {
  const m = median(values);
  const d: number[] = [];
  for (let i = 0; i < values.length; i++) if (Number.isFinite(values[i])) d.push(Math.abs(values[i] - m));
  return 1.4826 * median(d);
}

/**
 * Root-mean-square level of each trace over [start[t], end[t]) (clipped to the trace); NaN where
 * the window holds fewer than `minSamples` samples.
 */
export function windowRms(
  data: Float32Array,
  traceCount: number,
  sampleCount: number,
  start: ArrayLike<number>,
  end: ArrayLike<number>,
  minSamples = 1,
): Float64Array {
  assertTraceBlock(data, traceCount, sampleCount);
  if (start.length !== traceCount || end.length !== traceCount) {
    throw new RangeError(`start and end must hold ${traceCount} entries, got ${start.length} and ${end.length}`);
  }
  assertCount("minSamples", minSamples);
  const out = new Float64Array(traceCount);
  for (let t = 0; t < traceCount; t++) {
    const a = Math.max(0, Math.floor(start[t]));
    const b = Math.min(sampleCount, Math.floor(end[t]));
    if (b - a < Math.max(1, minSamples)) {
      out[t] = NaN;
      continue;
    }
    let e = 0;
    const base = t * sampleCount;
    for (let k = a; k < b; k++) e += data[base + k] * data[base + k];
    out[t] = Math.sqrt(e / (b - a));
  }
  return out;
}

/**
 * Level of each trace against its neighbours: rms[t] divided by the median rms of the up to
 * `neighbours` traces on each side (in the given order, e.g. along the spread) that are not all
 * zero. 0 for an all-zero trace; NaN when no neighbour has energy.
 */
export function neighbourLevelRatio(rms: ArrayLike<number>, order: ArrayLike<number>, neighbours: number): Float64Array {
  assertCount("neighbours", neighbours);
  if (neighbours < 1) throw new RangeError(`neighbours must be at least 1, got ${neighbours}`);
  const n = rms.length;
  if (order.length !== n) throw new RangeError(`order must hold ${n} entries, got ${order.length}`);
  const out = new Float64Array(n);
  const near: number[] = [];
  for (let r = 0; r < n; r++) {
    const t = order[r];
    near.length = 0;
    for (let side = -1; side <= 1; side += 2) {
      let found = 0;
      for (let q = r + side; q >= 0 && q < n && found < neighbours; q += side) {
        const v = rms[order[q]];
        if (v > 0) {
          near.push(v);
          found++;
        }
      }
    }
    const m = median(near);
    out[t] = rms[t] === 0 ? 0 : m > 0 ? rms[t] / m : NaN;
  }
  return out;
}

/** Bounds of the trace block and lag of one polarity comparison. */
export interface PolarityOptions {
  /** Order of the traces along the spread (trace indices); neighbours are taken in this order. */
  order: ArrayLike<number>;
  /** Receiver position of each trace, m (for the lag bound). */
  receiverX: ArrayLike<number>;
  /** Traces left out as partners (dead ones), 1 = skip. */
  skip: ArrayLike<number>;
  /** Neighbours on each side compared with. */
  neighbours: number;
  /** Sample window compared, [windowStart, windowEnd). */
  windowStart: number;
  windowEnd: number;
  /** Largest lag searched for a pair, samples per metre of receiver distance. */
  lagSamplesPerM: number;
  /** Lag searched on top of the move-out bound, samples (wavelet width, picking slack). */
  lagSlackSamples: number;
}

/**
 * Polarity score per trace: the median over its neighbours of the normalised cross-correlation at
 * the lag of largest magnitude (lag |ℓ| ≤ |Δx|·lagSamplesPerM + lagSlackSamples). Near +1 for a
 * trace that looks like its neighbours, near −1 for a reversed one; NaN for skipped traces and
 * traces without live neighbours.
 */
export function polarityScores(data: Float32Array, traceCount: number, sampleCount: number, o: PolarityOptions): Float64Array {
  assertTraceBlock(data, traceCount, sampleCount);
  assertCount("neighbours", o.neighbours);
  assertCount("windowStart", o.windowStart);
  assertCount("windowEnd", o.windowEnd);
  assertFinite("lagSamplesPerM", o.lagSamplesPerM);
  assertCount("lagSlackSamples", o.lagSlackSamples);
  if (o.windowEnd > sampleCount || o.windowStart >= o.windowEnd) {
    throw new RangeError(`polarity window [${o.windowStart}, ${o.windowEnd}) must lie inside the trace of ${sampleCount} samples`);
  }
  if (o.order.length !== traceCount || o.receiverX.length !== traceCount || o.skip.length !== traceCount) {
    throw new RangeError(`order, receiverX and skip must hold ${traceCount} entries each`);
  }
  const a0 = o.windowStart;
  const a1 = o.windowEnd;
  const energy = new Float64Array(traceCount);
  for (let t = 0; t < traceCount; t++) {
    let e = 0;
    for (let k = a0; k < a1; k++) e += data[t * sampleCount + k] ** 2;
    energy[t] = e;
  }
  const out = new Float64Array(traceCount).fill(NaN);
  const scores: number[] = [];
  for (let r = 0; r < traceCount; r++) {
    const t = o.order[r];
    if (o.skip[t] || energy[t] === 0) continue;
    scores.length = 0;
    for (let side = -1; side <= 1; side += 2) {
      let found = 0;
      for (let q = r + side; q >= 0 && q < traceCount && found < o.neighbours; q += side) {
        const n = o.order[q];
        if (o.skip[n] || energy[n] === 0) continue;
        found++;
        const maxLag = Math.min(a1 - a0 - 1, Math.ceil(Math.abs(o.receiverX[n] - o.receiverX[t]) * o.lagSamplesPerM) + o.lagSlackSamples);
        const norm = Math.sqrt(energy[t] * energy[n]);
        let best = 0;
        const bt = t * sampleCount;
        const bn = n * sampleCount;
        for (let lag = -maxLag; lag <= maxLag; lag++) {
          // Samples of t inside the window whose partner k + lag also lies inside it.
          const k0 = Math.max(a0, a0 - lag);
          const k1 = Math.min(a1, a1 - lag);
          let c = 0;
          for (let k = k0; k < k1; k++) c += data[bt + k] * data[bn + k + lag];
          if (Math.abs(c) > Math.abs(best)) best = c;
        }
        scores.push(best / norm);
      }
    }
    out[t] = median(scores);
  }
  return out;
}

/** Level of a spectral line (mains hum) in one trace. */
export interface LineLevel {
  /** Frequency of the line, Hz. */
  frequencyHz: number;
  /** Power at the line over the mean power of the bins beside it, dB. */
  levelDb: number;
  /** Amplitude of a sine at the line that gives this line power (Hann coherent gain removed). */
  amplitude: number;
}

/**
 * Hann-windowed DFT power of x[offset … offset+length) at each of `frequenciesHz` against the mean
 * power at f ± m/(N·dt) for m = firstSideBin … lastSideBin (inside 0 … Nyquist), in dB; plus the
 * amplitude of the line, 2|X(f)| / Σw. A sine of amplitude A in white noise of variance σ² gives
 * about 10·log10(A²·N / (6σ²)) dB (coherent gain Σw = N/2, noise power gain Σw² = 3N/8; Harris 1978).
 */
export function lineLevels(
  x: Float32Array,
  offset: number,
  length: number,
  sampleIntervalS: number,
  frequenciesHz: ArrayLike<number>,
  firstSideBin = 3,
  lastSideBin = 10,
): LineLevel[] {
  assertCount("offset", offset);
  assertCount("length", length);
  if (length < 8 || offset + length > x.length) throw new RangeError(`length must be 8 or more and fit the array, got ${length} at ${offset} of ${x.length}`);
  if (!(sampleIntervalS > 0)) throw new RangeError(`sampleIntervalS must be positive, got ${sampleIntervalS}`);
  const nyquist = 0.5 / sampleIntervalS;
  for (let i = 0; i < frequenciesHz.length; i++) {
    const f = frequenciesHz[i];
    if (!(f > 0 && f < nyquist)) throw new RangeError(`frequenciesHz[${i}] must lie in (0, ${nyquist}), got ${f}`);
  }
  assertCount("firstSideBin", firstSideBin);
  assertCount("lastSideBin", lastSideBin);
  if (firstSideBin < 1 || lastSideBin < firstSideBin) throw new RangeError(`side bins must satisfy 1 ≤ firstSideBin ≤ lastSideBin, got ${firstSideBin} … ${lastSideBin}`);
  // The periodic Hann window applied once.
  const w = new Float64Array(length);
  const c = (2 * Math.PI) / length;
  for (let k = 0; k < length; k++) w[k] = x[offset + k] * (0.5 - 0.5 * Math.cos(c * k));
  const df = 1 / (length * sampleIntervalS);
  const power = (f: number): number => {
    // Phasor rotated sample by sample (one cos/sin per frequency, not per sample).
    const step = 2 * Math.PI * f * sampleIntervalS;
    const cs = Math.cos(step);
    const sn = Math.sin(step);
    let cr = 1;
    let ci = 0;
    let re = 0;
    let im = 0;
    for (let k = 0; k < length; k++) {
      re += w[k] * cr;
      im -= w[k] * ci;
      const nr = cr * cs - ci * sn;
      ci = ci * cs + cr * sn;
      cr = nr;
    }
    return re * re + im * im;
  };
  const out: LineLevel[] = [];
  for (let i = 0; i < frequenciesHz.length; i++) {
    const frequencyHz = frequenciesHz[i];
    const p = power(frequencyHz);
    let side = 0;
    let count = 0;
    for (let m = firstSideBin; m <= lastSideBin; m++) {
      for (const f of [frequencyHz - m * df, frequencyHz + m * df]) {
        if (f <= 0 || f >= nyquist) continue;
        side += power(f);
        count++;
      }
    }
    const amplitude = (2 * Math.sqrt(p)) / (length / 2);
    const levelDb = side > 0 && count > 0 ? 10 * Math.log10(p / (side / count)) : p > 0 ? Infinity : 0;
    out.push({ frequencyHz, levelDb, amplitude });
  }
  return out;
}

/** Clipping in one trace. */
export interface ClippingCount {
  /** Samples inside runs of at least `minRun` samples at the largest magnitude. */
  clippedSamples: number;
  /** Longest run of samples at the largest magnitude. */
  longestRun: number;
  /** The largest magnitude. */
  peak: number;
}

/**
 * Counts samples of x[offset … offset+length) inside runs of at least `minRun` consecutive samples
 * whose magnitude is within `relativeTolerance` of the largest magnitude (a recorder at full scale
 * writes the same extreme value again and again: common practice). An all-zero trace has none.
 */
export function clippedSamples(x: Float32Array, offset: number, length: number, minRun = 3, relativeTolerance = 1e-6): ClippingCount {
  assertCount("offset", offset);
  assertCount("length", length);
  if (offset + length > x.length) throw new RangeError(`window ${offset} + ${length} exceeds the array of ${x.length}`);
  assertCount("minRun", minRun);
  if (minRun < 2) throw new RangeError(`minRun must be at least 2, got ${minRun}`);
  if (!(relativeTolerance >= 0 && relativeTolerance < 1)) throw new RangeError(`relativeTolerance must lie in [0, 1), got ${relativeTolerance}`);
  let peak = 0;
  for (let k = 0; k < length; k++) peak = Math.max(peak, Math.abs(x[offset + k]));
  if (peak === 0) return { clippedSamples: 0, longestRun: 0, peak };
  const level = peak * (1 - relativeTolerance);
  let run = 0;
  let longest = 0;
  let clipped = 0;
  for (let k = 0; k <= length; k++) {
    const at = k < length && Math.abs(x[offset + k]) >= level;
    if (at) {
      run++;
      continue;
    }
    if (run >= minRun) clipped += run;
    longest = Math.max(longest, run);
    run = 0;
  }
  return { clippedSamples: clipped, longestRun: longest, peak };
}

/** Source position from the symmetry of the move-out about the source. */
export interface SourceFit {
  /** Source position where the record is most symmetric, m (NaN when not judged). */
  sourceXM: number;
  /** sourceXM minus the logged position, m (NaN when not judged). */
  positionErrorM: number;
  /** Mean zero-lag correlation of the mirrored trace pairs at sourceXM, and at the logged position. */
  symmetry: number;
  symmetryAtLog: number;
  /** Mirrored pairs used at sourceXM. */
  pairs: number;
}

/**
 * Where is the source? In ground without strong lateral changes a record is symmetric about its
 * source: receivers at x₀ − d and x₀ + d see the same move-out and nearly the same trace. For each
 * candidate x₀ within `maxShiftM` of the logged position (at every midpoint of two receivers) the
 * mean normalised zero-lag correlation of the mirrored pairs with minOffsetM < d ≤ maxOffsetM over
 * samples [windowStart, windowEnd) is taken; the best candidate is refined by a parabola through its
 * neighbours. A source logged at the wrong position shows as an asymmetric move-out: the best x₀
 * moves away from the log (common practice of geometry checks; the symmetry measure is ours).
 * Not judged (NaN) with fewer than `minPairs` pairs at the best candidate.
 */
export function fitSourcePosition(
  data: Float32Array,
  traceCount: number,
  sampleCount: number,
  receiverX: ArrayLike<number>,
  skip: ArrayLike<number>,
  loggedSourceX: number,
  options: { minOffsetM: number; maxOffsetM: number; minPairs: number; maxShiftM: number; windowStart: number; windowEnd: number; positionToleranceM?: number },
): SourceFit {
  assertTraceBlock(data, traceCount, sampleCount);
  if (receiverX.length !== traceCount || skip.length !== traceCount) throw new RangeError(`receiverX and skip must hold ${traceCount} entries each`);
  assertFinite("loggedSourceX", loggedSourceX);
  const { minOffsetM, maxOffsetM, minPairs, maxShiftM, windowStart: a0, windowEnd: a1 } = options;
  const tol = options.positionToleranceM ?? 0.05;
  if (!(minOffsetM >= 0 && maxOffsetM > minOffsetM)) throw new RangeError(`need 0 ≤ minOffsetM < maxOffsetM, got ${minOffsetM} and ${maxOffsetM}`);
  assertCount("minPairs", minPairs);
  if (minPairs < 1) throw new RangeError(`minPairs must be at least 1, got ${minPairs}`);
  if (!(maxShiftM > 0)) throw new RangeError(`maxShiftM must be positive, got ${maxShiftM}`);
  assertCount("windowStart", a0);
  assertCount("windowEnd", a1);
  if (a1 > sampleCount || a0 >= a1) throw new RangeError(`window [${a0}, ${a1}) must lie inside the trace of ${sampleCount} samples`);

  const energy = new Float64Array(traceCount);
  for (let t = 0; t < traceCount; t++) {
    let e = 0;
    for (let k = a0; k < a1; k++) e += data[t * sampleCount + k] ** 2;
    energy[t] = e;
  }
  const live: number[] = [];
  for (let t = 0; t < traceCount; t++) if (!skip[t] && energy[t] > 0) live.push(t);
  live.sort((p, q) => receiverX[p] - receiverX[q]);
  const findAt = (x: number): number => {
    let lo = 0;
    let hi = live.length - 1;
    while (lo <= hi) {
      const mid = (lo + hi) >> 1;
      const v = receiverX[live[mid]];
      if (Math.abs(v - x) <= tol) return live[mid];
      if (v < x) lo = mid + 1;
      else hi = mid - 1;
    }
    return -1;
  };
  const score = (x0: number): { mean: number; pairs: number } => {
    let sum = 0;
    let pairs = 0;
    for (const a of live) {
      const d = x0 - receiverX[a];
      if (!(d > minOffsetM && d <= maxOffsetM)) continue;
      const b = findAt(x0 + d);
      if (b < 0) continue;
      let c = 0;
      for (let k = a0; k < a1; k++) c += data[a * sampleCount + k] * data[b * sampleCount + k];
      sum += c / Math.sqrt(energy[a] * energy[b]);
      pairs++;
    }
    return { mean: pairs > 0 ? sum / pairs : NaN, pairs };
  };
  // Candidates: the midpoints of receiver pairs within reach, on a grid of half the smallest spacing.
  let spacing = Infinity;
  for (let i = 1; i < live.length; i++) {
    const dx = receiverX[live[i]] - receiverX[live[i - 1]];
    if (dx > tol) spacing = Math.min(spacing, dx);
  }
  const notJudged: SourceFit = { sourceXM: NaN, positionErrorM: NaN, symmetry: NaN, symmetryAtLog: NaN, pairs: 0 };
  if (!Number.isFinite(spacing)) return notJudged;
  const h = spacing / 2;
  const origin = receiverX[live[0]];
  const first = Math.ceil((loggedSourceX - maxShiftM - origin) / h - 1e-9);
  const last = Math.floor((loggedSourceX + maxShiftM - origin) / h + 1e-9);
  const xs: number[] = [];
  const scores: number[] = [];
  let best = -1;
  for (let i = first; i <= last; i++) {
    const x0 = origin + i * h;
    const s = score(x0);
    xs.push(x0);
    scores.push(s.pairs >= minPairs ? s.mean : NaN);
    if (Number.isFinite(scores[scores.length - 1]) && (best < 0 || scores[scores.length - 1] > scores[best])) best = scores.length - 1;
  }
  const atLog = score(loggedSourceX);
  if (best < 0) return { ...notJudged, symmetryAtLog: atLog.pairs >= minPairs ? atLog.mean : NaN };
  let x0 = xs[best];
  const sm = scores[best - 1];
  const sp = scores[best + 1];
  if (Number.isFinite(sm) && Number.isFinite(sp)) {
    const curv = sm - 2 * scores[best] + sp;
    if (curv < 0) x0 += Math.max(-0.5, Math.min(0.5, (0.5 * (sm - sp)) / curv)) * h;
  }
  return {
    sourceXM: x0,
    positionErrorM: x0 - loggedSourceX,
    symmetry: scores[best],
    symmetryAtLog: atLog.pairs >= minPairs ? atLog.mean : NaN,
    pairs: score(xs[best]).pairs,
  };
}

/** Time shift of one record against another. */
export interface RecordLag {
  /** Lag of `b` behind `a`, s: b(t) ≈ a(t − lag). */
  lagS: number;
  /** Normalised correlation of the records at that lag. */
  correlation: number;
}

/**
 * Time shift between two records of the same spread (same trace order and sampling), from the
 * cross-correlation summed over the traces live in both, over samples [windowStart, windowEnd) of
 * `a`, lags |ℓ| ≤ maxLagSamples, refined by a parabola through the peak. A trigger that fires late
 * shifts the whole record early and the other way round (common practice).
 */
export function recordLag(
  a: Float32Array,
  b: Float32Array,
  traceCount: number,
  sampleCount: number,
  skip: ArrayLike<number>,
  sampleIntervalS: number,
  windowStart: number,
  windowEnd: number,
  maxLagSamples: number,
): RecordLag {
  assertTraceBlock(a, traceCount, sampleCount);
  assertTraceBlock(b, traceCount, sampleCount);
  if (skip.length !== traceCount) throw new RangeError(`skip must hold ${traceCount} entries, got ${skip.length}`);
  if (!(sampleIntervalS > 0)) throw new RangeError(`sampleIntervalS must be positive, got ${sampleIntervalS}`);
  assertCount("maxLagSamples", maxLagSamples);
  assertCount("windowStart", windowStart);
  assertCount("windowEnd", windowEnd);
  if (windowEnd > sampleCount || windowStart >= windowEnd) throw new RangeError(`window [${windowStart}, ${windowEnd}) must lie inside the trace of ${sampleCount} samples`);
  const lags = 2 * maxLagSamples + 1;
  const cc = new Float64Array(lags);
  let ea = 0;
  let eb = 0;
  for (let t = 0; t < traceCount; t++) {
    if (skip[t]) continue;
    const base = t * sampleCount;
    for (let k = windowStart; k < windowEnd; k++) {
      ea += a[base + k] * a[base + k];
      eb += b[base + k] * b[base + k];
    }
    for (let l = -maxLagSamples; l <= maxLagSamples; l++) {
      const k0 = Math.max(windowStart, -l);
      const k1 = Math.min(windowEnd, sampleCount - l);
      let c = 0;
      for (let k = k0; k < k1; k++) c += a[base + k] * b[base + k + l];
      cc[l + maxLagSamples] += c;
    }
  }
  if (!(ea > 0 && eb > 0)) return { lagS: NaN, correlation: NaN };
  let best = 0;
  for (let i = 1; i < lags; i++) if (cc[i] > cc[best]) best = i;
  let lag = best - maxLagSamples;
  if (best > 0 && best < lags - 1) {
    const curv = cc[best - 1] - 2 * cc[best] + cc[best + 1];
    if (curv < 0) lag += (0.5 * (cc[best - 1] - cc[best + 1])) / curv;
  }
  return { lagS: lag * sampleIntervalS, correlation: cc[best] / Math.sqrt(ea * eb) };
}
