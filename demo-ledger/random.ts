/**
 * Seeded pseudo-random numbers for the demo ledger: one 32-bit seed gives the same stream on every
 * run, so the same seed always produces the same ledger. Pure TypeScript (no `node:*`), so a
 * browser can generate the ledger too. Never uses `Math.random`.
 *
 * Generator: SFC32 ("small fast counting", Chris Doty-Humphrey, PractRand 0.94), 128-bit state,
 * seeded through SplitMix32 so that neighbouring seeds give unrelated streams.
 */

/** A seeded stream of random draws. Every method advances the same underlying state. */
export interface Random {
  /** Next raw 32-bit unsigned integer. */
  nextUint32(): number;
  /** Uniform double in the open interval (0, 1), 53-bit resolution; never exactly 0 or 1. */
  uniform(): number;
  /** Uniform double in [low, high). */
  between(low: number, high: number): number;
  /** Uniform integer in [low, high], both ends inclusive. */
  integer(low: number, high: number): number;
  /** True with probability p. */
  chance(p: number): boolean;
  /** Standard normal N(0, 1) draw (Box–Muller, Box & Muller 1958). */
  normal(): number;
  /** Log-normal draw: exp(ln(median) + sigma·Z), so `median` is the median of the draws. */
  logNormal(median: number, sigma: number): number;
  /** Exponential draw with the given mean (inverse CDF). */
  exponential(mean: number): number;
  /** Poisson draw with mean `lambda` ≥ 0. */
  poisson(lambda: number): number;
  /** Gamma draw with the given shape and mean (Marsaglia & Tsang 2000). */
  gamma(shape: number, mean: number): number;
  /** Index drawn with probability proportional to `weights[i]` (weights ≥ 0, sum > 0). */
  weighted(weights: readonly number[]): number;
}

const TWO_POW_53 = 9007199254740992;

/**
 * SplitMix32 step (a 32-bit variant of Steele, Lea & Flood 2014): spreads a small seed over the
 * 128-bit SFC32 state so seeds 1, 2, 3 … start far apart.
 */
function splitMix32(state: { x: number }): number {
  state.x = (state.x + 0x9e3779b9) | 0;
  let z = state.x;
  z = Math.imul(z ^ (z >>> 16), 0x85ebca6b);
  z = Math.imul(z ^ (z >>> 13), 0xc2b2ae35);
  return (z ^ (z >>> 16)) >>> 0;
}

/**
 * Creates a seeded random stream.
 * @param seed integer in [0, 2³² − 1]
 * @throws RangeError when the seed is not such an integer
 * @example
 * const rng = createRandom(7);
 * rng.uniform(); // same value on every run for seed 7
 */
export function createRandom(seed: number): Random {
  if (!Number.isInteger(seed) || seed < 0 || seed > 0xffffffff) {
    throw new RangeError(`seed: must be an integer from 0 to 4294967295, received ${String(seed)}`);
  }
  const mix = { x: seed | 0 };
  let a = splitMix32(mix) | 0;
  let b = splitMix32(mix) | 0;
  let c = splitMix32(mix) | 0;
  let d = 1; // the counter word; PractRand's reference seeding starts it at 1

  const nextUint32 = (): number => {
    const t0 = (a + b) | 0;
    a = b ^ (b >>> 9);
    b = (c + (c << 3)) | 0;
    c = (c << 21) | (c >>> 11);
    d = (d + 1) | 0;
    const t = (t0 + d) | 0;
    c = (c + t) | 0;
    return t >>> 0;
  };
  // Discard the first outputs: the state is poorly mixed right after seeding.
  for (let i = 0; i < 12; i++) nextUint32();

  const uniform = (): number => {
    // 53 random bits → (k + 0.5) / 2^53, which lies strictly inside (0, 1) so logs never see 0.
    const high = nextUint32() >>> 5; // 27 bits
    const low = nextUint32() >>> 6; // 26 bits
    return (high * 67108864 + low + 0.5) / TWO_POW_53;
  };

  let spareNormal: number | null = null;
  const normal = (): number => {
    if (spareNormal !== null) {
      const z = spareNormal;
      spareNormal = null;
      return z;
    }
    const radius = Math.sqrt(-2 * Math.log(uniform()));
    const angle = 2 * Math.PI * uniform();
    spareNormal = radius * Math.sin(angle);
    return radius * Math.cos(angle);
  };

  const exponential = (mean: number): number => -mean * Math.log(uniform());

  const poisson = (lambda: number): number => {
    if (!(lambda >= 0) || !Number.isFinite(lambda)) {
      throw new RangeError(`lambda: must be a finite number ≥ 0, received ${String(lambda)}`);
    }
    if (lambda === 0) return 0;
    if (lambda > 30) {
      // Normal approximation with continuity correction; the ledger never needs large means
      // exactly, and Knuth's product method below would underflow exp(−λ).
      return Math.max(0, Math.round(lambda + Math.sqrt(lambda) * normal()));
    }
    // Knuth's multiplication method (TAOCP vol. 2, §3.4.1): exact for small λ.
    const limit = Math.exp(-lambda);
    let k = 0;
    let product = uniform();
    while (product > limit) {
      k++;
      product *= uniform();
    }
    return k;
  };

  const gamma = (shape: number, mean: number): number => {
    if (!(shape > 0) || !(mean > 0)) {
      throw new RangeError(`gamma: shape and mean must be > 0, received shape ${shape}, mean ${mean}`);
    }
    // Marsaglia & Tsang (2000), "A simple method for generating gamma variables"; for shape < 1
    // draw with shape + 1 and scale by U^(1/shape).
    const boost = shape < 1 ? Math.pow(uniform(), 1 / shape) : 1;
    const k = shape < 1 ? shape + 1 : shape;
    const dd = k - 1 / 3;
    const cc = 1 / Math.sqrt(9 * dd);
    for (;;) {
      let z: number;
      let v: number;
      do {
        z = normal();
        v = 1 + cc * z;
      } while (v <= 0);
      v = v * v * v;
      const u = uniform();
      if (Math.log(u) < 0.5 * z * z + dd - dd * v + dd * Math.log(v)) {
        return dd * v * boost * (mean / shape);
      }
    }
  };

  return {
    nextUint32,
    uniform,
    between: (low, high) => low + (high - low) * uniform(),
    integer: (low, high) => low + Math.floor(uniform() * (high - low + 1)),
    chance: (p) => uniform() < p,
    normal,
    logNormal: (median, sigma) => median * Math.exp(sigma * normal()),
    exponential,
    poisson,
    gamma,
    weighted: (weights) => {
      let total = 0;
      for (const w of weights) total += w;
      let target = uniform() * total;
      for (let i = 0; i < weights.length; i++) {
        target -= weights[i];
        if (target < 0) return i;
      }
      // Round-off can leave a sliver past the last weight: return the last non-zero one.
      for (let i = weights.length - 1; i >= 0; i--) if (weights[i] > 0) return i;
      throw new RangeError("weights: must contain at least one weight > 0");
    },
  };
}
