/**
 * A small seeded stream for invented test and benchmark data: mulberry32 (a 32-bit generator by
 * Tommy Ettinger, public domain) with Box–Muller normals. Quick and reproducible from a seed, not
 * for anything statistical in the model itself: FAST-MCD draws its subsets from random.ts.
 * Not part of the public surface (index.ts does not export it).
 */

export interface SeededStream {
  /** Uniform in [0, 1). */
  uniform(): number;
  /** Uniform in (0, 1): never 0, for inverse-CDF sampling. */
  uniformOpen(): number;
  /** Standard normal (Box–Muller, cosine branch; two uniforms per value). */
  normal(): number;
}

/** @example mulberry32(7).normal() // the same number on every run */
export function mulberry32(seed: number): SeededStream {
  let state = seed >>> 0;
  const next = () => {
    state = (state + 0x6d2b79f5) >>> 0;
    let t = state;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return (t ^ (t >>> 14)) >>> 0;
  };
  const uniform = () => next() / 4294967296;
  return {
    uniform,
    uniformOpen: () => (next() + 0.5) / 4294967296,
    normal: () => Math.sqrt(-2 * Math.log(1 - uniform())) * Math.cos(2 * Math.PI * uniform()),
  };
}
