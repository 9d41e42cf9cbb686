/**
 * Cosine tapers for trace ends, mute edges and spectra.
 *
 * A cosine taper of length L rises as w(i) = 0.5 · (1 − cos(π · (i + 0.5) / L)), i = 0 … L − 1:
 * the half-period raised cosine (Hann ramp) that is common practice for mute and trace-end
 * tapers. Sampling at cell centres keeps the ramp symmetric: w(i) + w(L − 1 − i) = 1.
 */

/** Throws a RangeError naming `name` unless `value` is a finite number. */
export function assertFinite(name: string, value: number): void {
  if (typeof value !== "number" || !Number.isFinite(value)) {
    throw new RangeError(`${name} must be a finite number, got ${String(value)}`);
  }
}

/** Throws a RangeError naming `name` unless `value` is a non-negative integer. */
export function assertCount(name: string, value: number): void {
  if (!Number.isInteger(value) || value < 0) {
    throw new RangeError(`${name} must be a non-negative integer, got ${String(value)}`);
  }
}

/** Throws unless `data` holds exactly traceCount · sampleCount samples in `[trace][sample]` order. */
export function assertTraceBlock(data: ArrayLike<number>, traceCount: number, sampleCount: number): void {
  assertCount("traceCount", traceCount);
  assertCount("sampleCount", sampleCount);
  if (data.length !== traceCount * sampleCount) {
    throw new RangeError(
      `data must hold traceCount · sampleCount = ${traceCount} · ${sampleCount} = ${traceCount * sampleCount} samples, got ${data.length}`,
    );
  }
}

/**
 * Weight of a rising cosine ramp of `length` samples at position `i` (0 ≤ i < length);
 * 0 before the ramp, 1 after it.
 */
export function cosineRampWeight(i: number, length: number): number {
  if (i < 0) return 0;
  if (i >= length) return 1;
  return 0.5 * (1 - Math.cos((Math.PI * (i + 0.5)) / length));
}

/**
 * Multiplies both ends of `samples[offset … offset + count)` by a cosine taper of `taperSamples`
 * samples (in place). A taper longer than half the span is shortened to half the span.
 */
export function taperEndsInPlace(
  samples: Float32Array | Float64Array,
  offset: number,
  count: number,
  taperSamples: number,
): void {
  assertCount("taperSamples", taperSamples);
  const length = Math.min(taperSamples, Math.floor(count / 2));
  for (let i = 0; i < length; i++) {
    const w = cosineRampWeight(i, length);
    samples[offset + i] *= w;
    samples[offset + count - 1 - i] *= w;
  }
}

/**
 * Multiplier of a mute that keeps samples at and after `edge` (a fractional sample index) and
 * zeroes those before `edge − taperSamples`, with a cosine ramp in between.
 * Used for top mutes; a bottom mute uses `1 − keepAfterWeight`.
 */
export function keepAfterWeight(sampleIndex: number, edge: number, taperSamples: number): number {
  if (sampleIndex >= edge) return 1;
  if (taperSamples <= 0) return 0;
  const start = edge - taperSamples;
  if (sampleIndex <= start) return 0;
  return 0.5 * (1 - Math.cos((Math.PI * (sampleIndex - start)) / taperSamples));
}
