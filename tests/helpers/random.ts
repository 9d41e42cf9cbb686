/** Seeded pseudo-random numbers for tests (the engine's own generator; see pipeline/kernels/random.ts). */
export { mulberry32, gaussianSource, seededRandom, type SeededRandom, type UniformSource } from "../../pipeline/kernels/random";
