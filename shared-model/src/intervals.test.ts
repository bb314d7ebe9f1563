import { describe, expect, it } from "vitest";
import { gammaQuantile } from "./distributions";
import { garwoodInterval, IntervalInputError, wilsonInterval } from "./intervals";

function expectClose(actual: number, expected: number, tolerance: number, label: string): void {
  const diff = Math.abs(actual - expected) / Math.max(1e-300, Math.abs(expected));
  expect(diff, `${label}: actual ${actual}, expected ${expected}, relative difference ${diff}`).toBeLessThanOrEqual(tolerance);
}

describe("garwoodInterval", () => {
  it("reproduces the published exact Poisson limits for 0, 1, 2, 5 and 10 events", () => {
    // 95 % exact limits as tabulated for the Poisson mean (e.g. Documenta Geigy / Sachs tables;
    // from memory, to three decimals): 0 → 0–3.689, 1 → 0.025–5.572, 2 → 0.242–7.225,
    // 5 → 1.623–11.668, 10 → 4.795–18.390.
    const table: [number, number, number][] = [
      [0, 0, 3.689],
      [1, 0.025, 5.572],
      [2, 0.242, 7.225],
      [5, 1.623, 11.668],
      [10, 4.795, 18.39],
    ];
    for (const [k, low, high] of table) {
      const g = garwoodInterval(k);
      expect(Math.abs(g.low - low), `k ${k} low`).toBeLessThan(6e-4);
      expect(Math.abs(g.high - high), `k ${k} high`).toBeLessThan(6e-4);
    }
  });

  it("matches SciPy's gamma quantiles to 1e-10, for whole and effective (real) counts", () => {
    // SciPy 1.10.1 (Debian python3-scipy): low = scipy.special.gammaincinv(k, 0.025) (0 for k = 0),
    // high = scipy.special.gammaincinv(k + 1, 0.975).
    const scipy: [number, number, number][] = [
      [0, 0, 3.6888794541139354],
      [1, 0.025317807984289876, 5.571643390938898],
      [2, 0.24220927854396496, 7.22468766772396],
      [5, 1.6234863901184207, 11.66833207932267],
      [10, 4.7953886961324335, 18.39035604201778],
      [2.5, 0.41560580674333125, 8.006382137314663],
    ];
    for (const [k, low, high] of scipy) {
      const g = garwoodInterval(k);
      if (k === 0) expect(g.low).toBe(0);
      else expectClose(g.low, low, 1e-10, `k ${k} low`);
      expectClose(g.high, high, 1e-10, `k ${k} high`);
    }
    // scipy.special.gammaincinv(a, p) for shapes below and above 1.
    expectClose(gammaQuantile(0.025, 0.3), 3.1856790317391693e-6, 1e-9, "a 0.3");
    expectClose(gammaQuantile(0.975, 3.7), 8.312977261150271, 1e-10, "a 3.7");
    expectClose(gammaQuantile(0.5, 50.2), 49.86706302104524, 1e-10, "a 50.2");
    expectClose(gammaQuantile(0.9, 1), Math.LN10, 1e-12, "a 1"); // −ln(1 − 0.9) = ln 10
  });

  it("refuses a negative count and a confidence outside (0, 1), naming the field", () => {
    expect(() => garwoodInterval(-1)).toThrow(IntervalInputError);
    expect(() => garwoodInterval(-1)).toThrow("k: must be a finite count ≥ 0. Actual: -1");
    expect(() => garwoodInterval(3, 95)).toThrow("confidence: must be strictly between 0 and 1");
  });
});

describe("wilsonInterval", () => {
  it("matches SciPy's Wilson interval and is never zero-width", () => {
    // SciPy 1.10.1: scipy.stats.binomtest(3, 5).proportion_ci(0.95, method="wilson").
    const w = wilsonInterval(3, 5);
    expectClose(w.low, 0.23072428127601297, 1e-12, "low");
    expectClose(w.high, 0.8823792257673521, 1e-12, "high");
    expect(wilsonInterval(0, 40).high).toBeGreaterThan(0);
    expect(wilsonInterval(40, 40).low).toBeLessThan(1);
    expect(() => wilsonInterval(6, 5)).toThrow("successes: must be a number from 0 to trials (5). Actual: 6");
  });
});
