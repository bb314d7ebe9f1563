/**
 * A small, seeded, deterministic pseudo-random generator for the model core (random starts of
 * FAST-MCD, subsampling, synthetic test data). Same seed → same sequence on every platform, so a fit
 * can be reproduced from the seed stored with it.
 *
 * Generator: xoshiro128** 1.1 (Blackman & Vigna 2021, "Scrambled linear pseudorandom number
 * generators", ACM TOMS 47(4):36; reference code at prng.di.unimi.it/xoshiro128starstar.c), a
 * 128-bit state with period 2¹²⁸ − 1. The state is filled from the seed with SplitMix64 (Steele, Lea
 * & Flood 2014), as the xoshiro authors recommend, so nearby seeds give unrelated streams.
 * Not for cryptography.
 */

/** A seeded stream of pseudo-random numbers. */
export interface RandomSource {
  /** Uniform double in [0, 1) with 53 random bits. */
  next(): number;
  /**
   * Uniform integer in [0, maxExclusive), without modulo bias (rejection sampling).
   * @throws RangeError when `maxExclusive` is not an integer in [1, 2³²].
   */
  int(maxExclusive: number): number;
  /** Uniform unsigned 32-bit integer (the raw generator output). */
  nextUint32(): number;
}

/** Largest accepted seed: seeds are non-negative safe integers. */
const MAX_SEED = Number.MAX_SAFE_INTEGER;
const TWO_POW_32 = 4294967296;
const MASK_64 = (1n << 64n) - 1n;

/** One SplitMix64 step: advances `state` by the golden gamma and returns the mixed 64-bit output. */
function splitMix64(state: { x: bigint }): bigint {
  state.x = (state.x + 0x9e3779b97f4a7c15n) & MASK_64;
  let z = state.x;
  z = ((z ^ (z >> 30n)) * 0xbf58476d1ce4e5b9n) & MASK_64;
  z = ((z ^ (z >> 27n)) * 0x94d049bb133111ebn) & MASK_64;
  return z ^ (z >> 31n);
}

/**
 * The first 64-bit outputs of SplitMix64 started at `seed` (exposed for the known-answer test).
 * @example splitMix64Outputs(0, 1)[0] === 0xe220a8397b1dcdafn
 */
export function splitMix64Outputs(seed: number, count: number): bigint[] {
  checkSeed(seed);
  const state = { x: BigInt(seed) };
  const out: bigint[] = [];
  for (let i = 0; i < count; i++) out.push(splitMix64(state));
  return out;
}

function checkSeed(seed: number): void {
  if (typeof seed !== "number" || !Number.isInteger(seed) || seed < 0 || seed > MAX_SEED) {
    throw new RangeError(`seed must be an integer in [0, ${MAX_SEED}] (a non-negative safe integer). Actual: ${String(seed)}.`);
  }
}

/**
 * Creates a deterministic generator from a seed.
 *
 * The four 32-bit words of the xoshiro128** state are the low and high halves of the first two
 * SplitMix64 outputs started at `seed` (low half first). SplitMix64 never yields two zero outputs in
 * a row, so the state is never all-zero.
 *
 * @param seed non-negative safe integer (0 ≤ seed ≤ 2⁵³ − 1)
 * @throws RangeError when the seed is not a non-negative safe integer.
 * @example
 * const random = createRandom(42);
 * const u = random.next();      // in [0, 1)
 * const k = random.int(10);     // 0…9
 */
export function createRandom(seed: number): RandomSource {
  checkSeed(seed);
  const [a, b] = splitMix64Outputs(seed, 2);
  // Int32 words; all arithmetic below stays in 32-bit lanes (Math.imul, >>>).
  let s0 = Number(a & 0xffffffffn) | 0;
  let s1 = Number(a >> 32n) | 0;
  let s2 = Number(b & 0xffffffffn) | 0;
  let s3 = Number(b >> 32n) | 0;

  function nextUint32(): number {
    const product = Math.imul(s1, 5);
    const result = Math.imul((product << 7) | (product >>> 25), 9) >>> 0;
    const t = s1 << 9;
    s2 ^= s0;
    s3 ^= s1;
    s1 ^= s2;
    s0 ^= s3;
    s2 ^= t;
    s3 = (s3 << 11) | (s3 >>> 21);
    return result;
  }

  function next(): number {
    // 27 high bits of one draw and 26 of the next: a uniform multiple of 2⁻⁵³ in [0, 1).
    const high = nextUint32() >>> 5;
    const low = nextUint32() >>> 6;
    return (high * 67108864 + low) / 9007199254740992;
  }

  function int(maxExclusive: number): number {
    if (!Number.isInteger(maxExclusive) || maxExclusive < 1 || maxExclusive > TWO_POW_32) {
      throw new RangeError(`maxExclusive must be an integer in [1, ${TWO_POW_32}]. Actual: ${String(maxExclusive)}.`);
    }
    // Reject the top partial block of 2³² so every residue is equally likely.
    const limit = TWO_POW_32 - (TWO_POW_32 % maxExclusive);
    let u = nextUint32();
    while (u >= limit) u = nextUint32();
    return u % maxExclusive;
  }

  return { next, int, nextUint32 };
}
