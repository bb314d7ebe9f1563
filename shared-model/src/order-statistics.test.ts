import { describe, expect, it } from "vitest";
import { selectRank, selectRanks } from "./order-statistics";
import { createRandom } from "./random";
import { quantiles } from "./reservoir";

/** Type-7 quantiles from a full sort: the definition the selection must reproduce bit for bit. */
function sortedQuantiles(values: Float64Array, ps: readonly number[]): number[] {
  const sorted = Float64Array.from(values).sort();
  const m = sorted.length;
  return ps.map((p) => {
    const h = (m - 1) * p;
    const lo = Math.floor(h);
    const hi = Math.min(lo + 1, m - 1);
    return sorted[lo] + (h - lo) * (sorted[hi] - sorted[lo]);
  });
}

const DECILES = [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9];

describe("selectRanks", () => {
  it("puts at each wanted rank the value a sort puts there, for random, sorted, reversed and tied input", () => {
    const random = createRandom(12);
    const inputs = [
      Float64Array.from({ length: 1001 }, () => random.next() * 100 - 50),
      Float64Array.from({ length: 1000 }, (_, i) => i),
      Float64Array.from({ length: 1000 }, (_, i) => -i),
      Float64Array.from({ length: 997 }, () => Math.floor(random.next() * 3)),
      new Float64Array(500),
    ];
    for (const input of inputs) {
      const ranks = [0, 1, 99, 250, 251, 400, input.length - 2, input.length - 1];
      const selected = input.slice();
      selectRanks(selected, ranks);
      const sorted = input.slice().sort();
      for (const k of ranks) expect(selected[k]).toBe(sorted[k]);
    }
  });

  it("stays exact when median-of-three pivots are poor (organ-pipe input falls back to a sort of the range)", () => {
    const m = 4096;
    const input = Float64Array.from({ length: m }, (_, i) => (i < m / 2 ? i : m - i));
    const selected = input.slice();
    selectRanks(selected, [m >> 1]);
    expect(selected[m >> 1]).toBe(input.slice().sort()[m >> 1]);
  });
});

describe("selectRank", () => {
  it("returns the k-th smallest of a prefix and leaves the rest of the array alone", () => {
    const values = Float64Array.of(5, 1, 4, 2, 3, -100, -200);
    expect(selectRank(values, 1, 5)).toBe(2);
    expect(Array.from(values.subarray(5))).toEqual([-100, -200]);
  });
});

describe("quantiles", () => {
  it("gives the deciles of a full sort to the last bit, with ties, signed zeros and heavy tails", () => {
    const random = createRandom(7);
    const samples = [
      Float64Array.from({ length: 100_000 }, () => Math.round(random.next() * 1e6) / 1e3),
      Float64Array.from({ length: 9_999 }, () => (random.next() < 0.7 ? 0 : Math.exp(random.next() * 10))),
      Float64Array.from({ length: 1_234 }, () => (random.next() < 0.5 ? -0 : random.next() < 0.5 ? 0 : -Math.log(random.next()))),
      Float64Array.of(3),
      Float64Array.of(2, 1),
    ];
    for (const sample of samples) {
      const got = quantiles(sample, DECILES);
      const want = sortedQuantiles(sample, DECILES);
      for (let i = 0; i < DECILES.length; i++) expect(Object.is(got[i], want[i])).toBe(true);
    }
  });

  it("leaves its input untouched and still orders NaN last, as a sort does", () => {
    const input = Float64Array.of(4, Number.NaN, 1, 3, 2);
    const copy = input.slice();
    expect(quantiles(input, [0, 0.5, 0.7, 1])).toEqual(sortedQuantiles(input, [0, 0.5, 0.7, 1]));
    expect(quantiles(input, [0.5])).toEqual([3]);
    expect(input).toEqual(copy);
  });

  it("matches NumPy's default (linear) percentiles on a small sample", () => {
    // numpy.quantile([1, 2, 3, 4], [0.1, 0.5, 0.9]) = [1.3, 2.5, 3.7] (NumPy's default method "linear", Hyndman & Fan type 7)
    const got = quantiles(Float64Array.of(4, 1, 3, 2), [0.1, 0.5, 0.9]);
    [1.3, 2.5, 3.7].forEach((want, i) => expect(got[i]).toBeCloseTo(want, 12));
  });
});
