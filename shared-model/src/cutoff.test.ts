import stdlibChiSquareCdf from "@stdlib/stats-base-dists-chisquare-cdf";
import fc from "fast-check";
import { describe, expect, it } from "vitest";
import { cutoffForFlagRate } from "./cutoff";
import { chiSquareSurvival } from "./distributions";

describe("cutoffForFlagRate", () => {
  it("flags exactly 5 of the distances 1…100 at rate 0.05, with the cutoff between 95 and 96", () => {
    const values = Float64Array.from({ length: 100 }, (_, i) => 100 - i); // unsorted on purpose
    const cut = cutoffForFlagRate(values, 0.05, 3);
    // Hyndman & Fan definition 7: h = 99 · 0.95 = 94.05 → 95 + 0.05 · (96 − 95).
    expect(cut.mahalanobisSq).toBeCloseTo(95.05, 12);
    expect(cut.flagRate).toBe(0.05);
    expect(cut.tailProbability).toBe(chiSquareSurvival(cut.mahalanobisSq, 3));
    expect(values[0]).toBe(100); // input left untouched
  });

  it("interpolates linearly between order statistics (Hyndman & Fan definition 7) on a small sample", () => {
    // Worked by hand from the definition (Hyndman & Fan 1996, the default of R's quantile()):
    // sorted 0.2 0.8 1.1 2.4 3.7 4.4 5.9, p = 0.7, h = 6 · 0.7 = 4.2 → 3.7 + 0.2 · (4.4 − 3.7) = 3.84.
    const cut = cutoffForFlagRate(Float64Array.of(0.2, 1.1, 3.7, 2.4, 5.9, 0.8, 4.4), 0.3, 2);
    expect(cut.mahalanobisSq).toBeCloseTo(3.84, 12);
    expect(cut.flagRate).toBeCloseTo(2 / 7, 15);
  });

  it("reports the tail probability of the cutoff as P(χ²ₙ > cutoff), checked against stdlib", () => {
    const values = Float64Array.from({ length: 1000 }, (_, i) => (i * 13.7) % 21);
    for (const [rate, n] of [
      [0.01, 4],
      [0.1, 7],
      [0.5, 12],
    ] as const) {
      const cut = cutoffForFlagRate(values, rate, n);
      // Outside reference: @stdlib/stats-base-dists-chisquare-cdf (independent implementation).
      const reference = 1 - stdlibChiSquareCdf(cut.mahalanobisSq, n);
      expect(Math.abs(cut.tailProbability - reference) / reference).toBeLessThanOrEqual(1e-10);
    }
  });

  it("flags within 1/m of the requested rate when the distances are distinct", () => {
    fc.assert(
      fc.property(
        fc.uniqueArray(fc.double({ min: 0, max: 1e4, noNaN: true }), { minLength: 1, maxLength: 400 }),
        fc.double({ min: 1e-6, max: 1 - 1e-6, noNaN: true }),
        (list, rate) => {
          const values = Float64Array.from(list);
          const cut = cutoffForFlagRate(values, rate, 5);
          const above = list.filter((v) => v > cut.mahalanobisSq).length;
          expect(cut.flagRate).toBe(above / list.length);
          expect(Math.abs(cut.flagRate - rate)).toBeLessThanOrEqual(1 / list.length + 1e-12);
        },
      ),
      { numRuns: 300 },
    );
  });

  it("never flags rows equal to the cutoff, so ties at the cutoff lower the realised rate", () => {
    // 90 rows at 1, then 10 rows tied at 7: asking for 5 % cannot split the tie.
    const values = Float64Array.from({ length: 100 }, (_, i) => (i < 90 ? 1 : 7));
    const cut = cutoffForFlagRate(values, 0.05, 2);
    expect(cut.mahalanobisSq).toBe(7);
    expect(cut.flagRate).toBe(0);
    // Asking for 15 % puts the cutoff on the lower group (h = 84.15 falls among the 1s): the
    // 10 tied rows above flag, 10 % rather than 15 %, and the 1s cannot be split either.
    const wider = cutoffForFlagRate(values, 0.15, 2);
    expect(wider.mahalanobisSq).toBe(1);
    expect(wider.flagRate).toBe(0.1);
  });

  it("refuses a rate outside (0, 1), a bad n and bad distances, naming each", () => {
    const values = Float64Array.of(1, 2, 3);
    for (const rate of [0, 1, -0.1, 1.5, Number.NaN, Infinity]) {
      expect(() => cutoffForFlagRate(values, rate, 3)).toThrow(RangeError);
      expect(() => cutoffForFlagRate(values, rate, 3)).toThrow(/rate must be a number strictly between 0 and 1/);
    }
    expect(() => cutoffForFlagRate(values, 0.1, 0)).toThrow(/n \(degrees of freedom/);
    expect(() => cutoffForFlagRate(values, 0.1, 2.5)).toThrow(/n \(degrees of freedom/);
    expect(() => cutoffForFlagRate(new Float64Array(0), 0.1, 3)).toThrow(/at least one distance/);
    expect(() => cutoffForFlagRate(Float64Array.of(1, Number.NaN), 0.1, 3)).toThrow(/mahalanobisSqValues\[1\] must be a finite number ≥ 0. Actual: NaN/);
    expect(() => cutoffForFlagRate(Float64Array.of(-1, 2), 0.1, 3)).toThrow(/mahalanobisSqValues\[0\]/);
    expect(() => cutoffForFlagRate(Float64Array.of(1, Infinity), 0.1, 3)).toThrow(/mahalanobisSqValues\[1\]/);
  });

  it("returns the single distance as the cutoff for a one-row sample and flags nothing", () => {
    const cut = cutoffForFlagRate(Float64Array.of(4.2), 0.01, 3);
    expect(cut.mahalanobisSq).toBe(4.2);
    expect(cut.flagRate).toBe(0);
  });
});
