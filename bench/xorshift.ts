/**
 * xorshift32 (Marsaglia 2003), the generator bench/kernel.c uses, so TypeScript and C benchmarks
 * draw identical inputs. Returns raw 32-bit states; callers scale them to the interval they need.
 * @example const next = xorshift32(2463534242); next() / 4294967296 // a uniform in [0, 1)
 */
export function xorshift32(seed: number): () => number {
  let state = seed >>> 0 || 1;
  return () => {
    state ^= state << 13;
    state >>>= 0;
    state ^= state >>> 17;
    state ^= state << 5;
    state >>>= 0;
    return state;
  };
}
