import { describe, expect, it } from "vitest";
import { createRandom } from "./random";

const DRAWS = 100_000;

function moments(draw: () => number, n = DRAWS): { mean: number; variance: number } {
  let mean = 0;
  let m2 = 0;
  for (let i = 1; i <= n; i++) {
    const x = draw();
    const delta = x - mean;
    mean += delta / i;
    m2 += delta * (x - mean);
  }
  return { mean, variance: m2 / n };
}

describe("createRandom", () => {
  it("repeats the same stream for the same seed and a different one for another seed", () => {
    const a = createRandom(123);
    const b = createRandom(123);
    const c = createRandom(124);
    const first = Array.from({ length: 50 }, () => a.nextUint32());
    expect(Array.from({ length: 50 }, () => b.nextUint32())).toEqual(first);
    const other = Array.from({ length: 50 }, () => c.nextUint32());
    expect(other.filter((x, i) => x === first[i]).length).toBe(0);
  });

  it.each([-1, 1.5, 2 ** 32, Number.NaN])("refuses the seed %s, naming the seed and the rule", (seed) => {
    expect(() => createRandom(seed)).toThrow(/seed: must be an integer from 0 to 4294967295/);
  });

  it("draws uniforms strictly inside (0, 1) with mean 1/2 and variance 1/12", () => {
    const rng = createRandom(1);
    let outside = 0;
    const { mean, variance } = moments(() => {
      const u = rng.uniform();
      if (!(u > 0 && u < 1)) outside++;
      return u;
    });
    expect(outside).toBe(0);
    // Standard error of the mean is sqrt(1/12/1e5) ≈ 0.0009.
    expect(Math.abs(mean - 0.5)).toBeLessThan(0.004);
    expect(Math.abs(variance - 1 / 12)).toBeLessThan(0.002);
  });

  it("draws standard normals with 95 % of them inside ±1.96", () => {
    const rng = createRandom(2);
    let inside = 0;
    const { mean, variance } = moments(() => {
      const z = rng.normal();
      if (Math.abs(z) < 1.959964) inside++;
      return z;
    });
    expect(Math.abs(mean)).toBeLessThan(0.015);
    expect(Math.abs(variance - 1)).toBeLessThan(0.02);
    expect(Math.abs(inside / DRAWS - 0.95)).toBeLessThan(0.004);
  });

  it("matches the mean and variance of the exponential, Poisson and gamma draws to their parameters", () => {
    const rng = createRandom(3);
    const exponential = moments(() => rng.exponential(2.5));
    expect(Math.abs(exponential.mean / 2.5 - 1)).toBeLessThan(0.02);
    expect(Math.abs(exponential.variance / 6.25 - 1)).toBeLessThan(0.05);

    const poisson = moments(() => rng.poisson(3.2));
    expect(Math.abs(poisson.mean - 3.2)).toBeLessThan(0.03);
    expect(Math.abs(poisson.variance - 3.2)).toBeLessThan(0.08);

    // Gamma(shape k, mean μ): variance μ²/k; both the k < 1 and k ≥ 1 branches.
    for (const [shape, mean] of [
      [0.9, 0.045],
      [5, 1],
    ] as const) {
      const gamma = moments(() => rng.gamma(shape, mean));
      expect(Math.abs(gamma.mean / mean - 1)).toBeLessThan(0.02);
      expect(Math.abs(gamma.variance / ((mean * mean) / shape) - 1)).toBeLessThan(0.06);
    }

    // Log-normal: the median is the given one.
    const draws = Array.from({ length: 20_001 }, () => rng.logNormal(21, 0.5)).sort((x, y) => x - y);
    expect(Math.abs(draws[10_000] / 21 - 1)).toBeLessThan(0.02);
  });

  it("returns 0 for a Poisson mean of 0 and refuses a negative one", () => {
    const rng = createRandom(4);
    expect(rng.poisson(0)).toBe(0);
    expect(() => rng.poisson(-1)).toThrow(/lambda: must be a finite number ≥ 0/);
    expect(() => rng.gamma(0, 1)).toThrow(/shape and mean must be > 0/);
  });

  it("picks weighted indices in proportion to their weights and never a zero weight", () => {
    const rng = createRandom(5);
    const weights = [0.6, 0, 0.3, 0.1];
    const counts = [0, 0, 0, 0];
    for (let i = 0; i < DRAWS; i++) counts[rng.weighted(weights)]++;
    expect(counts[1]).toBe(0);
    weights.forEach((w, i) => expect(Math.abs(counts[i] / DRAWS - w)).toBeLessThan(0.006));
    expect(() => rng.weighted([0, 0])).toThrow(/weights: must contain at least one weight > 0/);
  });

  it("covers both ends of an integer range and nothing outside it", () => {
    const rng = createRandom(6);
    const seen = new Set<number>();
    for (let i = 0; i < 2_000; i++) seen.add(rng.integer(3, 7));
    expect([...seen].sort()).toEqual([3, 4, 5, 6, 7]);
  });
});
