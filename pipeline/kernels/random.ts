/**
 * Seeded pseudo-random numbers: reproducible test input, bench data and demo noise (no Math.random()).
 *
 * Uniform numbers come from mulberry32 (Tommy Ettinger's 32-bit generator, public domain;
 * period 2^32, passes the usual small-state statistical batteries, from memory). Gaussian
 * numbers use the Box-Muller transform (Box & Muller 1958, Ann. Math. Statist. 29, 610-611):
 * z0 = sqrt(-2 ln u1) cos(2 pi u2), z1 = sqrt(-2 ln u1) sin(2 pi u2).
 */

/** A seeded generator of uniform numbers in [0, 1). */
export type UniformSource = () => number;

/** Returns a mulberry32 generator seeded with the 32-bit integer `seed`. */
export function mulberry32(seed: number): UniformSource {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/**
 * Returns a generator of standard normal numbers (mean 0, standard deviation 1) drawn from
 * `uniform` by the Box-Muller transform; the second value of each pair is kept for the next call.
 */
export function gaussianSource(uniform: UniformSource): () => number {
  let spare: number | undefined;
  return () => {
    if (spare !== undefined) {
      const s = spare;
      spare = undefined;
      return s;
    }
    // 1 - u keeps the argument of the logarithm in (0, 1].
    const u1 = 1 - uniform();
    const u2 = uniform();
    const r = Math.sqrt(-2 * Math.log(u1));
    spare = r * Math.sin(2 * Math.PI * u2);
    return r * Math.cos(2 * Math.PI * u2);
  };
}

/** A seeded generator with uniform and Gaussian draws and array fills. */
export interface SeededRandom {
  /** Uniform in [0, 1). */
  uniform: () => number;
  /** Standard normal. */
  gaussian: () => number;
  /** Fills `out` with Gaussian numbers of mean `mean` and standard deviation `sigma`; returns `out`. */
  fillGaussian: <T extends Float32Array | Float64Array>(out: T, sigma?: number, mean?: number) => T;
}

/** Creates a seeded generator (mulberry32 + Box-Muller). */
export function seededRandom(seed: number): SeededRandom {
  const uniform = mulberry32(seed);
  const gaussian = gaussianSource(uniform);
  return {
    uniform,
    gaussian,
    fillGaussian(out, sigma = 1, mean = 0) {
      for (let i = 0; i < out.length; i++) out[i] = mean + sigma * gaussian();
      return out;
    },
  };
}
