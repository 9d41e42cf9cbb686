/**
 * Vertical stack kernels: combine repeated records (blows) of one source point, trace by
 * trace, into one record, and estimate how much the stack lowered the noise.
 *
 * Layout: every record is a flat Float32Array `[trace][sample]` of `traceCount * sampleCount`
 * values; all records of one stack share that layout. An optional mask `live`, flat
 * `[blow][trace]` (1 = take part, 0 = leave out), drops dead or killed traces of single blows.
 * Inputs are never modified. Scratch buffers are allocated once per call, never inside the
 * sample loops.
 */

/** The records to stack and their shared layout. */
export interface StackInput {
  /** One array per blow, each flat `[trace][sample]` with `traceCount * sampleCount` values. */
  records: readonly Float32Array[];
  /** Traces per record (>= 1). */
  traceCount: number;
  /** Samples per trace (>= 1). */
  sampleCount: number;
  /**
   * Optional mask, flat `[blow][trace]`, length `records.length * traceCount`: 1 when the trace
   * of that blow takes part in the stack, 0 when it is left out. Default: every trace takes part.
   */
  live?: Uint8Array;
}

/** Result of {@link weightedStack}. */
export interface WeightedStackResult {
  /** The stack, flat `[trace][sample]`. */
  stack: Float32Array;
  /**
   * Normalised weights, flat `[blow][trace]`: for each trace the weights of its live blows sum
   * to 1; left-out blows have weight 0.
   */
  weights: Float64Array;
}

/** Options of {@link weightedStack}. */
export interface WeightedStackOptions {
  /**
   * Lower bound of a blow's residual power, as a fraction of the largest residual power among
   * the blows of the same trace. Keeps weights finite when blows agree exactly with the
   * reference. Default 1e-6 (so no blow weighs more than a million times another).
   */
  varianceFloorRatio?: number;
}

function checkInput(input: StackInput, name = "input"): number {
  const { records, traceCount, sampleCount, live } = input;
  if (!Array.isArray(records)) throw new TypeError(`${name}.records must be an array of Float32Array, got ${typeof records}`);
  if (records.length < 1) throw new RangeError(`${name}.records must hold at least one record, got ${records.length}`);
  if (!Number.isInteger(traceCount) || traceCount < 1) {
    throw new RangeError(`${name}.traceCount must be a whole number >= 1, got ${traceCount}`);
  }
  if (!Number.isInteger(sampleCount) || sampleCount < 1) {
    throw new RangeError(`${name}.sampleCount must be a whole number >= 1, got ${sampleCount}`);
  }
  const n = traceCount * sampleCount;
  records.forEach((r, i) => {
    if (!(r instanceof Float32Array)) throw new TypeError(`${name}.records[${i}] must be a Float32Array`);
    if (r.length !== n) {
      throw new RangeError(`${name}.records[${i}] has ${r.length} samples, expected traceCount * sampleCount = ${n}`);
    }
  });
  if (live !== undefined) {
    if (!(live instanceof Uint8Array)) throw new TypeError(`${name}.live must be a Uint8Array`);
    if (live.length !== records.length * traceCount) {
      throw new RangeError(`${name}.live has length ${live.length}, expected records.length * traceCount = ${records.length * traceCount}`);
    }
  }
  return n;
}

function checkOut(out: Float32Array | undefined, n: number): Float32Array {
  if (out === undefined) return new Float32Array(n);
  if (!(out instanceof Float32Array)) throw new TypeError("out must be a Float32Array");
  if (out.length !== n) throw new RangeError(`out has length ${out.length}, expected ${n}`);
  return out;
}

function isLive(input: StackInput, blow: number, trace: number): boolean {
  return input.live === undefined || input.live[blow * input.traceCount + trace] !== 0;
}

/**
 * Mean stack: for each trace, the average of its live blows, sample by sample. Traces with no
 * live blow come out as zeros. For N blows of one signal plus independent noise of equal
 * variance, the noise standard deviation falls by sqrt(N).
 *
 * @param out Optional output buffer, flat `[trace][sample]` (may not alias a record).
 * @returns The stack, flat `[trace][sample]`.
 */
export function meanStack(input: StackInput, out?: Float32Array): Float32Array {
  const n = checkInput(input);
  const result = checkOut(out, n);
  const { records, traceCount, sampleCount } = input;
  const acc = new Float64Array(sampleCount);
  for (let t = 0; t < traceCount; t++) {
    acc.fill(0);
    let count = 0;
    const base = t * sampleCount;
    for (let b = 0; b < records.length; b++) {
      if (!isLive(input, b, t)) continue;
      const r = records[b];
      for (let s = 0; s < sampleCount; s++) acc[s] += r[base + s];
      count++;
    }
    const scale = count > 0 ? 1 / count : 0;
    for (let s = 0; s < sampleCount; s++) result[base + s] = acc[s] * scale;
  }
  return result;
}

/**
 * Sorts the first `count` values of `v` in place (insertion sort: the blow count is small)
 * and returns their median (mean of the two middle values for an even count).
 */
function medianOfFirst(v: Float64Array, count: number): number {
  for (let i = 1; i < count; i++) {
    const x = v[i];
    let j = i - 1;
    while (j >= 0 && v[j] > x) {
      v[j + 1] = v[j];
      j--;
    }
    v[j + 1] = x;
  }
  const h = count >> 1;
  return count % 2 === 1 ? v[h] : 0.5 * (v[h - 1] + v[h]);
}

/**
 * Median stack: for each trace and sample, the median over the live blows (mean of the two
 * middle values for an even count). Resists a single wild blow; for Gaussian noise it is less
 * efficient than the mean (asymptotic relative efficiency 2/pi, so the noise falls by about
 * sqrt(2N/pi) rather than sqrt(N); a textbook result, e.g. Kendall & Stuart, The Advanced Theory
 * of Statistics). Traces with no live blow come out as zeros.
 *
 * @param out Optional output buffer, flat `[trace][sample]`.
 * @returns The stack, flat `[trace][sample]`.
 */
export function medianStack(input: StackInput, out?: Float32Array): Float32Array {
  const n = checkInput(input);
  const result = checkOut(out, n);
  medianInto(input, result);
  return result;
}

/** Median over the live blows of every trace into `result`, flat `[trace][sample]`. */
function medianInto(input: StackInput, result: Float32Array): void {
  const { records, traceCount, sampleCount } = input;
  const values = new Float64Array(records.length);
  const liveBlows = new Int32Array(records.length);
  for (let t = 0; t < traceCount; t++) {
    let count = 0;
    for (let b = 0; b < records.length; b++) if (isLive(input, b, t)) liveBlows[count++] = b;
    const base = t * sampleCount;
    if (count === 0) {
      result.fill(0, base, base + sampleCount);
      continue;
    }
    for (let s = 0; s < sampleCount; s++) {
      for (let k = 0; k < count; k++) values[k] = records[liveBlows[k]][base + s];
      result[base + s] = medianOfFirst(values, count);
    }
  }
}

/**
 * Weighted stack that resists a bad blow: inverse-variance weighting with the variance of each
 * blow measured against the median trace.
 *
 * Method, per trace: (1) the median over the live blows, sample by sample, is a reference that
 * one bad blow cannot pull far; (2) each blow's residual power p_i = mean_t (x_i(t) - m(t))^2
 * measures its noise (plus any mismatch of its signal); (3) weights w_i = 1/p_i, normalised to
 * sum 1, give the inverse-variance weighted mean, the minimum-variance unbiased combination of
 * independent measurements of one quantity with known variances (Bevington & Robinson, Data
 * Reduction and Error Analysis for the Physical Sciences, ch. 4, "weighted mean"). A blow with
 * ten times the noise amplitude gets about 1/100 of the weight of a good one; a spike burst
 * raises p_i just as well. With equal noise in every blow the weights are nearly equal and the
 * stack behaves like the mean (noise falls by about sqrt(N)).
 *
 * Limits: with two live blows the median is their mean, both residuals are equal, and the
 * weights stay equal (two records cannot tell which one is bad). A blow whose signal is much
 * stronger or weaker than the others is down-weighted too, since the mismatch counts as residual.
 * One live blow is passed through with weight 1.
 *
 * @param out Optional output buffer, flat `[trace][sample]`.
 * @param weightsOut Optional buffer for the weights, flat `[blow][trace]`.
 */
export function weightedStack(
  input: StackInput,
  options: WeightedStackOptions = {},
  out?: Float32Array,
  weightsOut?: Float64Array,
): WeightedStackResult {
  const n = checkInput(input);
  const floorRatio = options.varianceFloorRatio ?? 1e-6;
  if (!(floorRatio > 0 && floorRatio < 1)) {
    throw new RangeError(`options.varianceFloorRatio must be in (0, 1), got ${floorRatio}`);
  }
  const { records, traceCount, sampleCount } = input;
  const blowCount = records.length;
  const result = checkOut(out, n);
  let weights: Float64Array;
  if (weightsOut === undefined) weights = new Float64Array(blowCount * traceCount);
  else {
    if (!(weightsOut instanceof Float64Array)) throw new TypeError("weightsOut must be a Float64Array");
    if (weightsOut.length !== blowCount * traceCount) {
      throw new RangeError(`weightsOut has length ${weightsOut.length}, expected records.length * traceCount = ${blowCount * traceCount}`);
    }
    weights = weightsOut;
  }
  weights.fill(0);

  const values = new Float64Array(blowCount);
  const liveBlows = new Int32Array(blowCount);
  const reference = new Float64Array(sampleCount);
  const power = new Float64Array(blowCount);
  const acc = new Float64Array(sampleCount);

  for (let t = 0; t < traceCount; t++) {
    const base = t * sampleCount;
    let count = 0;
    for (let b = 0; b < blowCount; b++) if (isLive(input, b, t)) liveBlows[count++] = b;
    if (count === 0) {
      result.fill(0, base, base + sampleCount);
      continue;
    }
    // Median reference trace.
    for (let s = 0; s < sampleCount; s++) {
      for (let k = 0; k < count; k++) values[k] = records[liveBlows[k]][base + s];
      reference[s] = medianOfFirst(values, count);
    }
    // Residual power of each live blow against the reference.
    let maxPower = 0;
    for (let k = 0; k < count; k++) {
      const r = records[liveBlows[k]];
      let sum = 0;
      for (let s = 0; s < sampleCount; s++) {
        const d = r[base + s] - reference[s];
        sum += d * d;
      }
      power[k] = sum / sampleCount;
      if (power[k] > maxPower) maxPower = power[k];
    }
    let wSum = 0;
    for (let k = 0; k < count; k++) {
      // All blows identical to the reference: equal weights.
      const w = maxPower > 0 ? 1 / Math.max(power[k], floorRatio * maxPower) : 1;
      weights[liveBlows[k] * traceCount + t] = w;
      wSum += w;
    }
    acc.fill(0);
    for (let k = 0; k < count; k++) {
      const b = liveBlows[k];
      const w = weights[b * traceCount + t] / wSum;
      weights[b * traceCount + t] = w;
      const r = records[b];
      for (let s = 0; s < sampleCount; s++) acc[s] += w * r[base + s];
    }
    for (let s = 0; s < sampleCount; s++) result[base + s] = acc[s];
  }
  return { stack: result, weights };
}

/**
 * The weights of a mean stack in the layout of {@link WeightedStackResult.weights}: 1/count for
 * each live blow of a trace, 0 for left-out blows (and for traces with no live blow).
 */
export function meanStackWeights(input: StackInput): Float64Array {
  checkInput(input);
  const { records, traceCount } = input;
  const weights = new Float64Array(records.length * traceCount);
  for (let t = 0; t < traceCount; t++) {
    let count = 0;
    for (let b = 0; b < records.length; b++) if (isLive(input, b, t)) count++;
    for (let b = 0; b < records.length; b++) if (isLive(input, b, t)) weights[b * traceCount + t] = 1 / count;
  }
  return weights;
}

/**
 * Mean square of the samples in the window `[firstSample, endSample)` of the traces whose mask
 * entry is non-zero (all traces when `traceMask` is absent). Returns NaN when no sample counts.
 *
 * @param data Flat `[trace][sample]`.
 * @param traceMask Optional, one entry per trace.
 */
export function windowMeanSquare(
  data: Float32Array,
  traceCount: number,
  sampleCount: number,
  firstSample: number,
  endSample: number,
  traceMask?: Uint8Array,
): number {
  if (!Number.isInteger(traceCount) || traceCount < 1) throw new RangeError(`traceCount must be a whole number >= 1, got ${traceCount}`);
  if (!Number.isInteger(sampleCount) || sampleCount < 1) throw new RangeError(`sampleCount must be a whole number >= 1, got ${sampleCount}`);
  if (data.length !== traceCount * sampleCount) {
    throw new RangeError(`data has length ${data.length}, expected traceCount * sampleCount = ${traceCount * sampleCount}`);
  }
  if (!Number.isInteger(firstSample) || firstSample < 0 || firstSample > sampleCount) {
    throw new RangeError(`firstSample must be a whole number in [0, ${sampleCount}], got ${firstSample}`);
  }
  if (!Number.isInteger(endSample) || endSample < firstSample || endSample > sampleCount) {
    throw new RangeError(`endSample must be a whole number in [${firstSample}, ${sampleCount}], got ${endSample}`);
  }
  if (traceMask !== undefined && traceMask.length !== traceCount) {
    throw new RangeError(`traceMask has length ${traceMask.length}, expected traceCount = ${traceCount}`);
  }
  let sum = 0;
  let count = 0;
  for (let t = 0; t < traceCount; t++) {
    if (traceMask !== undefined && traceMask[t] === 0) continue;
    const base = t * sampleCount;
    for (let s = firstSample; s < endSample; s++) {
      const v = data[base + s];
      sum += v * v;
    }
    count += endSample - firstSample;
  }
  return count > 0 ? sum / count : NaN;
}

/**
 * Noise variance of each blow estimated from the spread between blows, by Grubbs's estimator
 * for several instruments measuring the same items (Grubbs 1948, "On estimating precision of
 * measuring instruments and product variability", J. Amer. Statist. Assoc. 43, 243-264).
 *
 * Model: x_i(t) = s(t) + n_i(t), noise independent between blows with variance v_i. With the
 * blow mean xbar, d_i = mean_t (x_i - xbar)^2 has expectation v_i (1 - 2/N) + V/N^2 with
 * V = sum_j v_j; summing gives V = N/(N-1) * sum_i d_i, hence v_i = (d_i - V/N^2) / (1 - 2/N).
 * With N = 2 the two variances cannot be told apart and each gets V/2; with N = 1 nothing can
 * be estimated and the result is NaN. Estimates are clamped at 0 (sampling noise can push a
 * small one below). Only traces where every blow is live are used.
 *
 * @returns One variance per blow (amplitude units squared); NaN entries when no trace qualifies.
 */
export function blowNoiseVariances(input: StackInput): Float64Array {
  checkInput(input);
  const { records, traceCount, sampleCount } = input;
  const N = records.length;
  const result = new Float64Array(N).fill(NaN);
  if (N < 2) return result;
  const d = new Float64Array(N);
  let samples = 0;
  for (let t = 0; t < traceCount; t++) {
    let all = true;
    for (let b = 0; b < N; b++) if (!isLive(input, b, t)) all = false;
    if (!all) continue;
    const base = t * sampleCount;
    for (let s = 0; s < sampleCount; s++) {
      let mean = 0;
      for (let b = 0; b < N; b++) mean += records[b][base + s];
      mean /= N;
      for (let b = 0; b < N; b++) {
        const x = records[b][base + s] - mean;
        d[b] += x * x;
      }
    }
    samples += sampleCount;
  }
  if (samples === 0) return result;
  let sumD = 0;
  for (let b = 0; b < N; b++) {
    d[b] /= samples;
    sumD += d[b];
  }
  const total = (N / (N - 1)) * sumD;
  for (let b = 0; b < N; b++) {
    result[b] = N === 2 ? total / 2 : Math.max(0, (d[b] - total / (N * N)) / (1 - 2 / N));
  }
  return result;
}

/**
 * Noise variance of a linear stack with weights `weights` (flat `[blow][trace]`, each trace's
 * weights summing to 1) of blows with independent noise variances `blowVariances`:
 * sum_i w_i^2 v_i (variance of a weighted sum of independent variables), averaged over the
 * traces in `traceMask` (all when absent). Returns NaN when no trace counts.
 */
export function linearStackNoiseVariance(
  weights: Float64Array,
  blowVariances: Float64Array,
  traceCount: number,
  traceMask?: Uint8Array,
): number {
  const N = blowVariances.length;
  if (!Number.isInteger(traceCount) || traceCount < 1) throw new RangeError(`traceCount must be a whole number >= 1, got ${traceCount}`);
  if (weights.length !== N * traceCount) {
    throw new RangeError(`weights has length ${weights.length}, expected blowVariances.length * traceCount = ${N * traceCount}`);
  }
  let sum = 0;
  let count = 0;
  for (let t = 0; t < traceCount; t++) {
    if (traceMask !== undefined && traceMask[t] === 0) continue;
    let v = 0;
    for (let b = 0; b < N; b++) {
      const w = weights[b * traceCount + t];
      v += w * w * blowVariances[b];
    }
    sum += v;
    count++;
  }
  return count > 0 ? sum / count : NaN;
}
