import fc from "fast-check";
import { describe, expect, it } from "vitest";
import { DriftInputError, PSI_FLOOR, PSI_SHIFTED, PSI_WATCH, bucketIndex, decileReference, driftLevel, driftTable, flagRateCheck, psi, referencePsi } from "./drift";

function expectClose(actual: number, expected: number, tolerance = 1e-12): void {
  const diff = Math.abs(actual - expected) / Math.max(1e-300, Math.abs(expected));
  expect(diff, `actual ${actual}, expected ${expected}, relative difference ${diff}`).toBeLessThanOrEqual(tolerance);
}

const DECILES = Array.from({ length: 10 }, () => 0.1);

describe("psi", () => {
  it("matches a ten-decile example worked by hand (no published PSI table could be found to copy)", () => {
    // Worked by hand, not copied from a source: 1,000 recent payments over the ten training deciles
    // (expected 10 % each). Term (a − e)·ln(a/e) per bucket, a = count / 1000:
    //   0.120: +0.020·ln 1.20 = 0.020 · 0.1823216 = 0.0036464
    //   0.095: −0.005·ln 0.95 = 0.005 · 0.0512933 = 0.0002565
    //   0.110: +0.010·ln 1.10 = 0.010 · 0.0953102 = 0.0009531
    //   0.090: −0.010·ln 0.90 = 0.010 · 0.1053605 = 0.0010536
    //   0.105: +0.005·ln 1.05 = 0.005 · 0.0487902 = 0.0002440
    //   0.100: 0
    //   0.080: −0.020·ln 0.80 = 0.020 · 0.2231436 = 0.0044629
    //   0.115: +0.015·ln 1.15 = 0.015 · 0.1397619 = 0.0020964
    //   0.085: −0.015·ln 0.85 = 0.015 · 0.1625189 = 0.0024378
    //   0.100: 0
    //   total                                       = 0.0151506 → below 0.1: stable
    const value = psi(DECILES, [120, 95, 110, 90, 105, 100, 80, 115, 85, 100]);
    expect(Math.abs(value - 0.0151506)).toBeLessThan(5e-8);
    expect(driftLevel(value)).toBe("stable");
  });

  it("matches a two-bucket shift worked by hand", () => {
    // (0.6 − 0.5)·ln(0.6/0.5) + (0.4 − 0.5)·ln(0.4/0.5) = 0.1·0.1823216 + 0.1·0.2231436 = 0.0405465.
    expectClose(psi([0.5, 0.5], [60, 40]), 0.1 * Math.log(1.2) - 0.1 * Math.log(0.8));
  });

  it("equals the symmetrised Kullback–Leibler divergence KL(a‖e) + KL(e‖a) when no share is floored", () => {
    // Identity of the definition (Jeffreys 1946 divergence): Σ (a − e) ln(a/e) = Σ a ln(a/e) + Σ e ln(e/a).
    fc.assert(
      fc.property(fc.array(fc.tuple(fc.integer({ min: 1, max: 1000 }), fc.integer({ min: 1, max: 1000 })), { minLength: 2, maxLength: 12 }), (pairs) => {
        const eRaw = pairs.map((p) => p[0]);
        const counts = pairs.map((p) => p[1]);
        const eSum = eRaw.reduce((s, x) => s + x, 0);
        const cSum = counts.reduce((s, x) => s + x, 0);
        const e = eRaw.map((x) => x / eSum);
        const a = counts.map((x) => x / cSum);
        if (e.some((x) => x < PSI_FLOOR) || a.some((x) => x < PSI_FLOOR)) return;
        let kl = 0;
        for (let i = 0; i < e.length; i++) kl += a[i] * Math.log(a[i] / e[i]) + e[i] * Math.log(e[i] / a[i]);
        expectClose(psi(e, counts), kl, 1e-9);
        expect(psi(e, counts)).toBeGreaterThanOrEqual(0);
      }),
    );
  });

  it("floors an empty bucket at 1e-4 so one missing decile gives a finite, clearly shifted index", () => {
    const counts = [0, 100, 100, 100, 100, 100, 100, 100, 100, 100];
    // Bucket 0: (1e-4 − 0.1)·ln(1e-4/0.1); the other nine: (1/9 − 0.1)·ln((1/9)/0.1).
    const expected = (PSI_FLOOR - 0.1) * Math.log(PSI_FLOOR / 0.1) + 9 * (1 / 9 - 0.1) * Math.log(1 / 9 / 0.1);
    expectClose(psi(DECILES, counts), expected);
    expect(driftLevel(psi(DECILES, counts))).toBe("shifted");
  });

  it("refuses bad shares and counts, naming the field", () => {
    expect(() => psi([1], [3])).toThrow("expectedShares: must have at least two buckets. Actual: 1");
    expect(() => psi([0.5, 0.5], [1])).toThrow("actualCounts: must have one count per bucket (2). Actual: 1");
    expect(() => psi([0.5, 0.6], [1, 1])).toThrow("expectedShares: must sum to 1");
    expect(() => psi([0.5, 0.5], [1, -1])).toThrow("actualCounts[1]: must be a finite count ≥ 0. Actual: -1");
    expect(() => psi([0.5, 0.5], [0, 0])).toThrow("actualCounts: must hold at least one payment");
    expect(() => psi([Number.NaN, 0.5], [1, 1])).toThrow(DriftInputError);
  });
});

describe("driftLevel", () => {
  it("uses the alert levels 0.1 and 0.25 common in credit scoring (Siddiqi 2006), our own words for them", () => {
    // Common practice (Siddiqi 2006, "Credit Risk Scorecards"): < 0.1 no shift, 0.1–0.25 some, ≥ 0.25 a shift.
    expect([PSI_WATCH, PSI_SHIFTED]).toEqual([0.1, 0.25]);
    expect(driftLevel(0)).toBe("stable");
    expect(driftLevel(0.0999)).toBe("stable");
    expect(driftLevel(0.1)).toBe("watch");
    expect(driftLevel(0.2499)).toBe("watch");
    expect(driftLevel(0.25)).toBe("shifted");
    expect(() => driftLevel(-0.1)).toThrow("psi: must be a finite number ≥ 0. Actual: -0.1");
  });
});

describe("bucketIndex", () => {
  it("puts a value equal to an edge in the bucket below it (right-closed buckets)", () => {
    expect(bucketIndex([1, 2, 3], 0.5)).toBe(0);
    expect(bucketIndex([1, 2, 3], 1)).toBe(0);
    expect(bucketIndex([1, 2, 3], 1.5)).toBe(1);
    expect(bucketIndex([1, 2, 3], 3)).toBe(2);
    expect(bucketIndex([1, 2, 3], 7)).toBe(3);
    expect(bucketIndex([0, 0, 0, 2], 0)).toBe(0);
    expect(() => bucketIndex([1], Number.NaN)).toThrow("value: must be a number");
  });

  it("agrees with counting the edges below the value", () => {
    fc.assert(
      fc.property(fc.array(fc.integer({ min: -20, max: 20 }), { minLength: 1, maxLength: 15 }), fc.integer({ min: -25, max: 25 }), (raw, v) => {
        const edges = [...raw].sort((a, b) => a - b);
        expect(bucketIndex(edges, v)).toBe(edges.filter((e) => e < v).length);
      }),
    );
  });
});

describe("referencePsi", () => {
  it("gives 0 when recent traffic falls exactly 10 % into each training decile", () => {
    expect(referencePsi([1, 2, 3, 4, 5, 6, 7, 8, 9], [50, 50, 50, 50, 50, 50, 50, 50, 50, 50])).toBe(0);
  });

  it("merges the buckets between equal edges (a point mass such as a count that is mostly 0)", () => {
    // Eight deciles at 0, the ninth at 0.69: buckets "≤ 0" (shares 1–8 merged: 0.8), (0, 0.69] 0.1, "> 0.69" 0.1.
    const edges = [0, 0, 0, 0, 0, 0, 0, 0, 0.69];
    const counts = [850, 0, 0, 0, 0, 0, 0, 0, 50, 100];
    expectClose(referencePsi(edges, counts), psi([0.8, 0.1, 0.1], [850, 50, 100]));
    // Same payments, no drift in the mass at 0: a small index, not the 0.9 an unmerged table would give.
    expect(referencePsi(edges, counts)).toBeLessThan(PSI_WATCH);
  });

  it("refuses decreasing edges, a wrong number of counts and a constant column, naming the field", () => {
    expect(() => referencePsi([1, 0.5], [1, 1, 1])).toThrow("edges[1]: must not be below edges[0]");
    expect(() => referencePsi([1, 2], [1, 1])).toThrow("counts: must have one count per bucket (edges + 1 = 3). Actual: 2");
    expect(() => referencePsi([], [1])).toThrow("edges: must hold at least one cut point");
  });
});

describe("driftTable", () => {
  it("lists every model column and the score with its index and level", () => {
    const reference = {
      columnEdges: [
        [1, 2, 3],
        [10, 20, 30],
      ],
      scoreEdges: [0.5, 1.5, 3],
    };
    const rows = driftTable(reference, ["amount", "items"], {
      columns: [
        [25, 25, 25, 25],
        [70, 10, 10, 10],
      ],
      score: [25, 25, 25, 25],
    });
    expect(rows.map((r) => [r.name, r.level])).toEqual([
      ["amount", "stable"],
      ["items", "shifted"],
      ["mahalanobisSq", "stable"],
    ]);
    expectClose(rows[1].psi, psi([0.25, 0.25, 0.25, 0.25], [70, 10, 10, 10]));
    expect(() =>
      driftTable(reference, ["amount", "items"], {
        columns: [
          [1, 1, 1, 1],
          [1, 1],
        ],
        score: [1, 1, 1, 1],
      }),
    ).toThrow("items.counts: must have one count per bucket");
  });
});

describe("flagRateCheck", () => {
  it("reproduces Wilson score intervals published by Newcombe (1998)", () => {
    // Outside reference: R. G. Newcombe (1998), "Two-sided confidence intervals for the single
    // proportion: comparison of seven methods", Statistics in Medicine 17:857–872, Table I, score
    // method without continuity correction (values from memory, 4 decimals; recomputed and equal):
    // 81/263 → 0.2553–0.3662; 15/148 → 0.0624–0.1605; 0/20 → 0–0.1611; 1/29 → 0.0061–0.1718.
    const cases: [number, number, number, number][] = [
      [81, 263, 0.2553, 0.3662],
      [15, 148, 0.0624, 0.1605],
      [0, 20, 0, 0.1611],
      [1, 29, 0.0061, 0.1718],
    ];
    for (const [flagged, scored, low, high] of cases) {
      const check = flagRateCheck(flagged, scored, 0.1);
      expect(Math.abs(check.low - low), `${flagged}/${scored} low`).toBeLessThanOrEqual(5e-5);
      expect(Math.abs(check.high - high), `${flagged}/${scored} high`).toBeLessThanOrEqual(5e-5);
    }
  });

  it("says whether the day's flag rate is above, below or as expected", () => {
    expect(flagRateCheck(81, 263, 0.25).verdict).toBe("above");
    expect(flagRateCheck(81, 263, 0.3).verdict).toBe("as-expected");
    expect(flagRateCheck(81, 263, 0.4).verdict).toBe("below");
    // A quiet day: 3 flags in 2,000 payments against an expected 1 %.
    expect(flagRateCheck(3, 2000, 0.01)).toMatchObject({ observedRate: 0.0015, verdict: "below" });
  });

  it("refuses impossible counts, rates and levels, naming the field", () => {
    expect(() => flagRateCheck(5, 0, 0.01)).toThrow("scored: must be a whole number ≥ 1. Actual: 0");
    expect(() => flagRateCheck(11, 10, 0.01)).toThrow("flagged: must be a whole number from 0 to scored (10). Actual: 11");
    expect(() => flagRateCheck(1, 10, 1.2)).toThrow("expectedRate: must be a share between 0 and 1. Actual: 1.2");
    expect(() => flagRateCheck(1, 10, 0.1, 1)).toThrow("confidence");
  });
});

describe("decileReference", () => {
  it("counts each bucket's training share instead of assuming 10 %, so training data scores PSI 0 against itself", () => {
    // A count column that is mostly 0: 65 % zeros, then 1 … 35.
    const values = Float64Array.from({ length: 100 }, (_, i) => (i < 65 ? 0 : i - 64));
    const ref = decileReference(values);
    expect(ref.edges.slice(0, 6)).toEqual([0, 0, 0, 0, 0, 0]);
    expect(ref.shares[0]).toBeCloseTo(0.65, 12);
    expect(ref.shares.reduce((a, b) => a + b, 0)).toBeCloseTo(1, 12);
    const counts = new Array(10).fill(0);
    for (const v of values) counts[bucketIndex(ref.edges, v)]++;
    expect(referencePsi(ref.edges, counts, ref.shares)).toBe(0);
    // Against equal shares the same data looks drifted: bucket 0 "expects" 60 %, holds 65 %.
    expect(referencePsi(ref.edges, counts)).toBeGreaterThan(0.003);
  });

  it("matches NumPy's default percentiles for the edges", () => {
    // NumPy 1.24.2 (Debian python3-numpy): numpy.percentile([3, 1, 4, 1, 5, 9, 2, 6, 5, 3, 5],
    // [10, 20, …, 90]) = [1, 2, 3, 3, 4, 5, 5, 5, 6] (linear interpolation, Hyndman–Fan definition 7).
    const ref = decileReference(Float64Array.of(3, 1, 4, 1, 5, 9, 2, 6, 5, 3, 5));
    expect(ref.edges).toEqual([1, 2, 3, 3, 4, 5, 5, 5, 6]);
    expect(() => decileReference(new Float64Array(0))).toThrow("values: must hold at least one value");
  });
});
