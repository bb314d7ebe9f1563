/**
 * Correlated Gaussian rows for the fit benchmarks: z standard normal (Box–Muller over xorshift32
 * uniforms), x = 10 + L z with a fixed lower-triangular mixing matrix L, so the columns have a
 * dense correlation structure. Deterministic for given seeds.
 */
import { xorshift32 } from "./xorshift";

/**
 * A generator of rows of `n` columns.
 * @param mixingSeed seed of the matrix L
 * @param drawSeed seed of the normal draws
 * @returns a function that fills `out` (length n) with the next row
 * @example const next = correlatedGaussian(32, 7, 11); next(row)
 */
export function correlatedGaussian(n: number, mixingSeed: number, drawSeed: number): (out: Float64Array) => void {
  const uniformFrom = (seed: number) => {
    const next = xorshift32(seed);
    // Uniforms strictly inside (0, 1), as Box–Muller's logarithm needs.
    return () => (next() + 0.5) / 4294967296;
  };
  const mixingUniform = uniformFrom(mixingSeed);
  const mixing = new Float64Array(n * n);
  for (let i = 0; i < n; i++) for (let j = 0; j <= i; j++) mixing[i * n + j] = i === j ? 1 : 0.4 * (mixingUniform() - 0.5);
  const uniform = uniformFrom(drawSeed);
  const z = new Float64Array(n);
  return (out) => {
    for (let i = 0; i < n; i += 2) {
      const radius = Math.sqrt(-2 * Math.log(uniform()));
      const angle = 2 * Math.PI * uniform();
      z[i] = radius * Math.cos(angle);
      if (i + 1 < n) z[i + 1] = radius * Math.sin(angle);
    }
    for (let i = 0; i < n; i++) {
      let s = 10;
      for (let j = 0; j <= i; j++) s += mixing[i * n + j] * z[j];
      out[i] = s;
    }
  };
}
