/**
 * Automatic picking of a dispersion curve on a phase-shift image: the maximum per frequency
 * within user bounds, followed from the frequency with the most distinct peak towards lower and
 * higher frequencies with a continuity constraint (the pick may move by at most a set fraction
 * of the previous pick from one frequency to the next, and the walk stops at a gap of several
 * frequencies without a clear peak), refined between velocity samples by a
 * parabola through the three samples around the maximum (common practice for sub-sample peaks).
 *
 * Image layout: flat `[frequency][velocity]`. Units: Hz, m/s.
 */

/** Settings of {@link pickDispersionCurve}. */
export interface PickOptions {
  /** Lowest and highest phase velocity a pick may take, m/s. */
  minVelocityMps: number;
  maxVelocityMps: number;
  /** Frequencies outside [minFrequencyHz, maxFrequencyHz] get no pick. */
  minFrequencyHz: number;
  maxFrequencyHz: number;
  /** Largest change of the pick from one frequency to the next, as a fraction of the previous pick. */
  maxStepFraction: number;
  /** A pick needs an image value of at least this fraction of the row maximum within the bounds. */
  minRelativeValue: number;
  /**
   * The walk away from the anchor stops after this many frequencies in a row without a pick (the
   * curve may have moved further than the continuity limit allows across a gap). Default 3.
   */
  maxGapFrequencies?: number;
  /** Take the slowest clear peak rather than the strongest (the fundamental mode is the slowest). Default false. */
  preferSlowest?: boolean;
  /**
   * Spacing of the traces the image was stacked from, m (0 or absent: no limit). Picks slower than
   * f · spacing are left out: a phase-shift stack over traces spaced dx apart cannot tell a wave of
   * phase velocity c from one of 1/c' = 1/c + n/(f·dx) (spatial sampling: phases differing by 2πn
   * from trace to trace), and every such repetition on the slow side lies below f·dx. On a 1 m spread
   * the 150 m/s surface wave at 80 Hz repeats at 52 m/s, where an unbounded picker finds it.
   */
  aliasSpacingM?: number;
}

/** A picked curve: NaN velocity where no pick was made. */
export interface PickedCurve {
  /** Phase velocity per frequency of the image, m/s (NaN: no pick). */
  velocitiesMps: Float64Array;
  /** Image value at each pick (NaN: no pick). */
  values: Float64Array;
}

/** Peak position between samples j−1, j, j+1 of a parabola through the three values (offset in [−½, ½]). */
function parabolicOffset(a: number, b: number, c: number): number {
  const den = a - 2 * b + c;
  if (!(den < 0)) return 0;
  const d = (0.5 * (a - c)) / den;
  return Math.max(-0.5, Math.min(0.5, d));
}

/** Picks one dispersion curve (usually the fundamental mode) on a phase-shift image. */
export function pickDispersionCurve(
  image: ArrayLike<number>,
  frequenciesHz: ArrayLike<number>,
  velocitiesMps: ArrayLike<number>,
  o: PickOptions,
): PickedCurve {
  const nf = frequenciesHz.length;
  const nc = velocitiesMps.length;
  if (image.length !== nf * nc) throw new RangeError(`image has ${image.length} cells, expected ${nf} · ${nc}`);
  if (!(o.maxVelocityMps > o.minVelocityMps)) throw new RangeError(`maxVelocityMps (${o.maxVelocityMps}) must exceed minVelocityMps (${o.minVelocityMps})`);
  if (!(o.maxStepFraction > 0)) throw new RangeError(`maxStepFraction must be > 0, got ${o.maxStepFraction}`);
  if (!(o.minRelativeValue >= 0 && o.minRelativeValue <= 1)) throw new RangeError(`minRelativeValue must lie in [0, 1], got ${o.minRelativeValue}`);
  const vel = new Float64Array(nf).fill(NaN);
  const val = new Float64Array(nf).fill(NaN);
  if (nc < 3) return { velocitiesMps: vel, values: val };
  const dc = (velocitiesMps[nc - 1] - velocitiesMps[0]) / (nc - 1);
  const inBand = (q: number) => frequenciesHz[q] >= o.minFrequencyHz && frequenciesHz[q] <= o.maxFrequencyHz;
  const spacing = o.aliasSpacingM ?? 0;
  if (!(spacing >= 0)) throw new RangeError(`aliasSpacingM must be ≥ 0, got ${o.aliasSpacingM}`);
  /** Slowest velocity a pick at row q may take: above every slow-side repetition, f · spacing. */
  const aliasFloor = (q: number) => frequenciesHz[q] * spacing;

  /** Index of the largest value in the [cLo, cHi] velocity window at row q (above the alias floor), or −1. */
  const strongestIn = (q: number, cLo: number, cHi: number): number => {
    cLo = Math.max(cLo, aliasFloor(q));
    let best = -1;
    let bv = -Infinity;
    for (let j = 0; j < nc; j++) {
      const c = velocitiesMps[j];
      if (c < cLo || c > cHi) continue;
      const v = image[q * nc + j];
      if (v > bv) {
        bv = v;
        best = j;
      }
    }
    return best;
  };
  const rowMax = (q: number) => {
    const j = strongestIn(q, o.minVelocityMps, o.maxVelocityMps);
    return j < 0 ? 0 : image[q * nc + j];
  };
  /**
   * The pick candidate in the window: the strongest value, or with `preferSlowest` the slowest
   * local maximum that reaches minRelativeValue of the row maximum (the fundamental mode is the
   * slowest of the Rayleigh modes, common practice), else the strongest.
   */
  const bestIn = (q: number, cLo: number, cHi: number): number => {
    if (o.preferSlowest) {
      cLo = Math.max(cLo, aliasFloor(q));
      const floor = o.minRelativeValue * rowMax(q);
      for (let j = 0; j < nc; j++) {
        const c = velocitiesMps[j];
        if (c < cLo || c > cHi) continue;
        const v = image[q * nc + j];
        const left = j > 0 ? image[q * nc + j - 1] : -Infinity;
        const right = j < nc - 1 ? image[q * nc + j + 1] : -Infinity;
        if (v > 0 && v >= floor && v >= left && v >= right) return j;
      }
    }
    return strongestIn(q, cLo, cHi);
  };
  const accept = (q: number, j: number): boolean => {
    const v = image[q * nc + j];
    if (velocitiesMps[j] < aliasFloor(q)) return false;
    if (!(v > 0) || v < o.minRelativeValue * rowMax(q)) return false;
    // A maximum on the edge of the search window is not a peak unless it is the image edge.
    const left = j > 0 ? image[q * nc + j - 1] : -Infinity;
    const right = j < nc - 1 ? image[q * nc + j + 1] : -Infinity;
    return v >= left && v >= right;
  };
  const record = (q: number, j: number) => {
    const off = j > 0 && j < nc - 1 ? parabolicOffset(image[q * nc + j - 1], image[q * nc + j], image[q * nc + j + 1]) : 0;
    vel[q] = velocitiesMps[j] + off * dc;
    val[q] = image[q * nc + j];
  };

  // Anchor: the in-band frequency whose bounded peak stands out most above the row mean.
  let anchor = -1;
  let bestContrast = -Infinity;
  for (let q = 0; q < nf; q++) {
    if (!inBand(q)) continue;
    const j = bestIn(q, o.minVelocityMps, o.maxVelocityMps);
    if (j < 0 || !accept(q, j)) continue;
    let mean = 0;
    for (let k = 0; k < nc; k++) mean += image[q * nc + k];
    mean /= nc;
    const contrast = image[q * nc + j] / (mean > 0 ? mean : 1e-30);
    if (contrast > bestContrast) {
      bestContrast = contrast;
      anchor = q;
    }
  }
  if (anchor < 0) return { velocitiesMps: vel, values: val };
  record(anchor, bestIn(anchor, o.minVelocityMps, o.maxVelocityMps));

  const maxGap = o.maxGapFrequencies ?? 3;
  if (!Number.isInteger(maxGap) || maxGap < 1) throw new RangeError(`maxGapFrequencies must be an integer ≥ 1, got ${maxGap}`);
  for (const dir of [-1, 1]) {
    let prev = vel[anchor];
    let gap = 0;
    for (let q = anchor + dir; q >= 0 && q < nf; q += dir) {
      if (!inBand(q)) break;
      const lo = Math.max(o.minVelocityMps, prev * (1 - o.maxStepFraction));
      const hi = Math.min(o.maxVelocityMps, prev * (1 + o.maxStepFraction));
      const j = bestIn(q, lo, hi);
      if (j >= 0 && accept(q, j)) {
        record(q, j);
        prev = vel[q];
        gap = 0;
      } else if (++gap >= maxGap) {
        break;
      }
    }
  }
  return { velocitiesMps: vel, values: val };
}
