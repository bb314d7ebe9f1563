import stdlibChiSquareCdf from "@stdlib/stats-base-dists-chisquare-cdf";
import stdlibChiSquareQuantile from "@stdlib/stats-base-dists-chisquare-quantile";
import fc from "fast-check";
import { describe, expect, it } from "vitest";
import {
  chiSquareCdf,
  chiSquareQuantile,
  chiSquareSurvival,
  chiSquareUpperQuantile,
  lnGamma,
  log10ChiSquareSurvival,
  logChiSquareSurvival,
  normalQuantile,
  regularizedGammaP,
  regularizedGammaQ,
} from "./distributions";
import { readReferenceData } from "../../test/reference-data/files";

/** Parses a table `df,alpha_0.10,…` into rows of { df, alpha, value }. */
function readCriticalValues(file: string): { df: number; alpha: number; value: number }[] {
  const [header, ...lines] = readReferenceData(file).trim().split(/\r?\n/);
  const alphas = header
    .split(",")
    .slice(1)
    .map((label) => Number(label.replace("alpha_", "")));
  return lines.flatMap((line) => {
    const [df, ...values] = line.split(",").map(Number);
    return values.map((value, j) => ({ df, alpha: alphas[j], value }));
  });
}

/** Fails with the numbers when |actual − expected| > rel·|expected| + abs. */
function expectClose(actual: number, expected: number, rel: number, abs = 0, label = ""): void {
  const difference = Math.abs(actual - expected);
  const allowed = rel * Math.abs(expected) + abs;
  if (!(difference <= allowed)) {
    throw new Error(
      `${label}: expected ${expected}, got ${actual} (difference ${difference.toExponential(3)}, ` +
        `relative ${(difference / Math.abs(expected)).toExponential(3)}, allowed ${allowed.toExponential(3)})`,
    );
  }
}

/** ln(n!) by summing logs: independent of lnGamma. */
function logFactorial(n: number): number {
  let s = 0;
  for (let k = 2; k <= n; k++) s += Math.log(k);
  return s;
}

/** ln Σ exp(terms), stably. */
function logSumExp(terms: number[]): number {
  const max = Math.max(...terms);
  return max + Math.log(terms.reduce((s, t) => s + Math.exp(t - max), 0));
}

/**
 * ln P(χ²_dof > x) evaluated independently of the module: for even dof the Poisson closed form
 * Q(m, y) = e^{−y} Σ_{i<m} yⁱ/i! summed in log space; for odd dof (x ≫ dof) the asymptotic series
 * Γ(a, y) = y^{a−1}e^{−y} Σₙ (a−1)(a−2)…(a−n)/yⁿ (Abramowitz & Stegun 6.5.32) with
 * Γ(k+½) = (2k)!·√π / (4ᵏ·k!).
 */
function independentLogSurvival(x: number, dof: number): number {
  const y = x / 2;
  if (dof % 2 === 0) {
    const terms: number[] = [];
    for (let i = 0; i < dof / 2; i++) terms.push(i * Math.log(y) - logFactorial(i));
    return -y + logSumExp(terms);
  }
  const a = dof / 2;
  const k = a - 0.5;
  const logGammaA = logFactorial(2 * k) + 0.5 * Math.log(Math.PI) - k * Math.log(4) - logFactorial(k);
  let term = 1;
  let sum = 1;
  for (let n = 1; n < 400; n++) {
    const next = (term * (a - n)) / y;
    if (Math.abs(next) >= Math.abs(term) && n > a) break; // the asymptotic series starts to diverge
    term = next;
    sum += term;
    if (Math.abs(term) < 1e-18 * Math.abs(sum)) break;
  }
  return (a - 1) * Math.log(y) - y - logGammaA + Math.log(sum);
}

describe("lnGamma", () => {
  it("equals ln((n−1)!) at the integers 1 to 40", () => {
    for (let n = 1; n <= 40; n++) {
      const expected = logFactorial(n - 1);
      expectClose(lnGamma(n), expected, 1e-15, 5e-15, `lnGamma(${n})`);
    }
  });

  it("equals ln((2k)!·√π/(4ᵏ·k!)) at the half-integers k + ½ up to 40.5", () => {
    for (let k = 0; k <= 40; k++) {
      const expected = logFactorial(2 * k) + 0.5 * Math.log(Math.PI) - k * Math.log(4) - logFactorial(k);
      expectClose(lnGamma(k + 0.5), expected, 1e-15, 5e-15, `lnGamma(${k + 0.5})`);
    }
  });

  it("satisfies the recurrence ln Γ(x+1) − ln Γ(x) = ln x for arbitrary positive x", () => {
    fc.assert(
      fc.property(fc.double({ min: 1e-6, max: 1e6, noNaN: true }), (x) => {
        const scale = 1 + Math.abs(lnGamma(x + 1)) + Math.abs(lnGamma(x));
        // Two evaluations, each within the documented ~4e-15 absolute error below 8.
        expectClose(lnGamma(x + 1) - lnGamma(x), Math.log(x), 0, 4e-16 * scale + 8e-15, `x = ${x}`);
      }),
      { numRuns: 500 },
    );
  });

  it("behaves like −ln x near 0 and like the Stirling leading terms for huge x", () => {
    // Γ(x) = 1/x − γ + O(x) near 0; γ = 0.5772156649015329 (Euler–Mascheroni, from memory).
    const x = 1e-8;
    expectClose(lnGamma(x), Math.log(1 / x - 0.5772156649015329), 1e-15, 1e-15, "lnGamma(1e-8)");
    expect(Number.isFinite(lnGamma(1e300))).toBe(true);
  });

  it("rejects zero, negative and non-finite arguments with a RangeError that names x and the rule", () => {
    for (const bad of [0, -1, Number.NaN, Infinity]) {
      expect(() => lnGamma(bad)).toThrow(RangeError);
      expect(() => lnGamma(bad)).toThrow(`x must be a finite number > 0. Actual: ${bad}`);
    }
  });
});

describe("regularizedGammaP and regularizedGammaQ", () => {
  it("match the closed forms P(1, x) = 1 − e^{−x} and Q(1, x) = e^{−x}", () => {
    // Tolerance: P and Q are formed as e^{ln prefix + ln sum}; an exponent of size ~700 carries
    // ~1e-13 relative rounding, one of size ~23 (x = 1e-10) ~3e-15.
    for (const x of [1e-10, 0.3, 1, 2, 5, 30, 100, 700]) {
      const rel = 2e-15 + 2e-16 * Math.abs(Math.log(Math.min(Math.exp(-x), -Math.expm1(-x))));
      expectClose(regularizedGammaQ(1, x), Math.exp(-x), rel, 0, `Q(1, ${x})`);
      expectClose(regularizedGammaP(1, x), -Math.expm1(-x), rel, 0, `P(1, ${x})`);
    }
  });

  it("add up to one for arbitrary a and x", () => {
    fc.assert(
      fc.property(fc.double({ min: 0.01, max: 500, noNaN: true }), fc.double({ min: 0, max: 2000, noNaN: true }), (a, x) => {
        expectClose(regularizedGammaP(a, x) + regularizedGammaQ(a, x), 1, 4e-15, 0, `a = ${a}, x = ${x}`);
      }),
      { numRuns: 1000 },
    );
  });

  it("return the limits at x = 0 and x = Infinity", () => {
    expect(regularizedGammaP(2.5, 0)).toBe(0);
    expect(regularizedGammaQ(2.5, 0)).toBe(1);
    expect(regularizedGammaP(2.5, Infinity)).toBe(1);
    expect(regularizedGammaQ(2.5, Infinity)).toBe(0);
  });

  it("reject a non-positive shape and a negative or NaN x, naming the argument", () => {
    expect(() => regularizedGammaP(0, 1)).toThrow("a must be a finite number > 0. Actual: 0");
    expect(() => regularizedGammaQ(-2, 1)).toThrow("a must be a finite number > 0. Actual: -2");
    expect(() => regularizedGammaP(1, -1)).toThrow("x must be a number ≥ 0 (Infinity allowed). Actual: -1");
    expect(() => regularizedGammaQ(1, Number.NaN)).toThrow(RangeError);
  });
});

describe("chiSquareQuantile and chiSquareUpperQuantile against published tables", () => {
  it("reproduce the NIST/SEMATECH e-Handbook upper critical values (df 1–30) to the printed 3 decimals", () => {
    // NIST/SEMATECH e-Handbook of Statistical Methods §1.3.6.7.4, "Critical Values of the Chi-Square
    // Distribution" (upper tail). Two cells (df 8 and 12 at alpha 0.001) are double-rounded in the
    // handbook by up to 5.2e-4, hence abs tol 6e-4 (reference-data/SOURCES.md §5).
    const rows = readCriticalValues("chi2-upper-critical-values-nist-3dp.csv");
    expect(rows).toHaveLength(150);
    for (const { df, alpha, value } of rows) {
      expectClose(chiSquareUpperQuantile(alpha, df), value, 0, 6e-4, `NIST df ${df} alpha ${alpha}`);
      expectClose(chiSquareQuantile(1 - alpha, df), value, 0, 6e-4, `NIST df ${df} p ${1 - alpha}`);
    }
  });

  it("reproduce SciPy's full-precision chi2.isf table (df 1–30) to 1e-10 relative", () => {
    // reference-data/chi2-upper-critical-values.csv: scipy.stats.chi2.isf(alpha, df), scipy 1.10.1.
    const rows = readCriticalValues("chi2-upper-critical-values.csv");
    expect(rows).toHaveLength(150);
    for (const { df, alpha, value } of rows) {
      expectClose(chiSquareUpperQuantile(alpha, df), value, 1e-10, 0, `SciPy df ${df} alpha ${alpha}`);
      expectClose(chiSquareQuantile(1 - alpha, df), value, 1e-10, 0, `SciPy df ${df} p ${1 - alpha}`);
      // Going back through the survival function lands on alpha.
      expectClose(chiSquareSurvival(value, df), alpha, 1e-12, 0, `survival df ${df} at ${value}`);
    }
  });

  it("reproduce the spot values recorded in expected-values.json", () => {
    // reference-data/expected-values.json → chi2_upper_critical (scipy chi2.isf / sf / cdf).
    const expected = JSON.parse(readReferenceData("expected-values.json")).chi2_upper_critical;
    for (const [key, value] of Object.entries(expected.spot_values as Record<string, number>)) {
      const median = /^df(\d+)_median_isf0\.5$/.exec(key);
      const match = /^df(\d+)_alpha([\d.]+)$/.exec(key);
      if (median) {
        expectClose(chiSquareQuantile(0.5, Number(median[1])), value, 1e-12, 0, key);
      } else if (match) {
        expectClose(chiSquareUpperQuantile(Number(match[2]), Number(match[1])), value, 1e-12, 0, key);
      } else {
        throw new Error(`unrecognised spot value ${key}`);
      }
    }
    const cdfSpots = expected.cdf_spot_values as Record<string, number>;
    expectClose(chiSquareCdf(9.487729036781154, 4), cdfSpots["P(chi2_4 <= 9.487729036781154)"], 1e-13, 0, "cdf spot");
    expectClose(chiSquareSurvival(10, 3), cdfSpots["P(chi2_3 > 10.0)"], 1e-13, 0, "sf spot df 3");
    expectClose(chiSquareSurvival(5.991464547107979, 2), cdfSpots["P(chi2_2 > 5.991464547107979)"], 1e-13, 0, "sf spot df 2");
  });
});

describe("chi-square functions against the @stdlib reference library", () => {
  it("agree with @stdlib's chi-square cdf for dof 1–64 over x from 0.001·dof to 6·dof", () => {
    // @stdlib/stats-base-dists-chisquare-cdf 0.3.1 (npm). It returns the lower tail only, so near
    // P = 1 the comparison allows the 1.1e-16 rounding of that double.
    let worst = 0;
    for (let dof = 1; dof <= 64; dof++) {
      for (let i = 0; i <= 300; i++) {
        const x = dof * 0.001 * Math.pow(6000, i / 300);
        const reference = stdlibChiSquareCdf(x, dof);
        const cdf = chiSquareCdf(x, dof);
        const survival = chiSquareSurvival(x, dof);
        const tail = Math.min(reference, 1 - reference);
        expectClose(cdf, reference, 1e-12, 2.3e-16, `cdf dof ${dof} x ${x}`);
        expectClose(survival, 1 - reference, 0, 1e-12 * tail + 2.3e-16, `survival dof ${dof} x ${x}`);
        worst = Math.max(worst, Math.abs(cdf - reference) / reference);
      }
    }
    expect(worst).toBeLessThan(1e-12);
  });

  it("agree with @stdlib's chi-square quantile for dof 1–64 over p from 1e-12 to 1 − 1e-12", () => {
    // @stdlib/stats-base-dists-chisquare-quantile 0.2.3 (npm).
    for (let dof = 1; dof <= 64; dof++) {
      for (let i = 1; i < 200; i++) {
        const p = i / 200;
        expectClose(chiSquareQuantile(p, dof), stdlibChiSquareQuantile(p, dof), 1e-12, 0, `dof ${dof} p ${p}`);
      }
      for (const p of [1e-12, 1e-8, 1e-4, 0.999, 0.99999]) {
        expectClose(chiSquareQuantile(p, dof), stdlibChiSquareQuantile(p, dof), 1e-11, 0, `dof ${dof} p ${p}`);
      }
    }
  });
});

describe("chiSquareSurvival", () => {
  it("matches the closed form e^{−x/2}·Σ_{i<k/2}(x/2)ⁱ/i! for even dof", () => {
    for (const dof of [2, 4, 6, 10, 16, 32, 64, 128]) {
      for (const x of [0.01, 0.5, 1, dof / 2, dof - 1, dof, dof + 3, 2 * dof, 5 * dof, 100, 300]) {
        const y = x / 2;
        let term = 1;
        let sum = 1;
        for (let i = 1; i < dof / 2; i++) {
          term *= y / i;
          sum += term;
        }
        expectClose(chiSquareSurvival(x, dof), Math.exp(-y) * sum, 2e-13, 0, `dof ${dof} x ${x}`);
      }
    }
  });

  it("keeps full relative precision far in the tail (dof 32, x = 400), where 1 − cdf is 0", () => {
    const independent = Math.exp(independentLogSurvival(400, 32));
    expect(independent).toBeGreaterThan(1e-70);
    expect(1 - chiSquareCdf(400, 32)).toBe(0);
    expectClose(chiSquareSurvival(400, 32), independent, 1e-13, 0, "dof 32 x 400");
  });

  it("agrees with an independent log-space evaluation for odd and even dof deep in the tail", () => {
    for (const dof of [1, 3, 5, 7, 15, 33, 2, 4, 32, 64]) {
      for (const x of [200, 400, 800, 1300]) {
        const logExpected = independentLogSurvival(x, dof);
        // The exponent itself (|ln Q| up to ~650) carries ~1e-13 relative rounding once exponentiated.
        const rel = 1e-13 + 4e-16 * Math.abs(logExpected);
        expectClose(chiSquareSurvival(x, dof), Math.exp(logExpected), rel, 0, `dof ${dof} x ${x}`);
      }
    }
  });

  it("returns values near 1e-300 and subnormal values instead of 0, and 0 only when the true value underflows", () => {
    const near300 = independentLogSurvival(1400, 4); // ≈ ln 6.9e-302
    expectClose(chiSquareSurvival(1400, 4), Math.exp(near300), 1e-12, 0, "dof 4 x 1400");
    const subnormal = independentLogSurvival(1480, 4); // ≈ ln 1.5e-319, below the smallest normal double
    expect(Math.exp(subnormal)).toBeLessThan(2.2250738585072014e-308);
    expectClose(chiSquareSurvival(1480, 4), Math.exp(subnormal), 1e-4, 0, "subnormal tail");
    // ln Q < ln(5e-324) ≈ −744.4: no double can hold it.
    expect(independentLogSurvival(1600, 4)).toBeLessThan(-745.2);
    expect(chiSquareSurvival(1600, 4)).toBe(0);
  });

  it("returns 1 for x ≤ 0 and 0 at Infinity, the values of the distribution", () => {
    expect(chiSquareSurvival(0, 3)).toBe(1);
    expect(chiSquareSurvival(-1e-17, 3)).toBe(1);
    expect(chiSquareSurvival(Infinity, 3)).toBe(0);
    expect(chiSquareCdf(0, 3)).toBe(0);
    expect(chiSquareCdf(Infinity, 3)).toBe(1);
  });

  it("rejects a dof that is not a positive integer and a NaN x, naming the argument and the rule", () => {
    expect(() => chiSquareSurvival(1, 0)).toThrow("dof must be a positive integer. Actual: 0");
    expect(() => chiSquareSurvival(1, 2.5)).toThrow("dof must be a positive integer. Actual: 2.5");
    expect(() => chiSquareCdf(1, -3)).toThrow(RangeError);
    expect(() => chiSquareSurvival(1, 2e9)).toThrow("dof must be at most 1000000000. Actual: 2000000000");
    expect(() => chiSquareSurvival(Number.NaN, 3)).toThrow("x must be a number (not NaN). Actual: NaN");
  });
});

describe("logChiSquareSurvival", () => {
  it("matches ln Q(dof/2, x/2) from mpmath far beyond where the probability itself underflows", () => {
    // mpmath 1.3.0 (Debian python3-mpmath), mp.dps = 40:
    //   mp.log(mp.gammainc(mpf(dof)/2, mpf(x)/2, mp.inf, regularized=True)).
    // SciPy 1.17.1's scipy.stats.chi2.logsf returns -inf for every case from (1600, 4) on: it
    // takes the log of an underflowed survival function, the fault this function exists to avoid.
    const cases: [number, number, number][] = [
      [400, 32, -148.34698249613262005],
      [1400, 4, -693.44749211296540991],
      [1600, 4, -793.31413905293164078],
      [5000, 9, -2475.0681751130509574],
      [20000, 9, -9970.2171952426790118],
      [2e6, 4, -999986.18448844203623],
      [1e5, 1, -50005.982264084879854],
      [3000, 31, -1420.4855117480495305],
    ];
    for (const [x, dof, expected] of cases) {
      expectClose(logChiSquareSurvival(x, dof), expected, 1e-13, 0, `ln Q dof ${dof} x ${x}`);
      expectClose(log10ChiSquareSurvival(x, dof), expected / Math.LN10, 1e-13, 0, `log10 Q dof ${dof} x ${x}`);
    }
    expect(chiSquareSurvival(1600, 4)).toBe(0);
  });

  it("agrees with the log of chiSquareSurvival wherever that is a normal double, and orders tails that underflow", () => {
    for (const dof of [1, 2, 3, 9, 32]) {
      for (const x of [0.01, 1, dof, 3 * dof, 100, 600]) {
        expectClose(logChiSquareSurvival(x, dof), Math.log(chiSquareSurvival(x, dof)), 1e-12, 1e-15, `dof ${dof} x ${x}`);
      }
    }
    // Past the double's range the log keeps distinct distances distinct (a queue sorted by it does not tie).
    expect(logChiSquareSurvival(3000, 9)).toBeLessThan(logChiSquareSurvival(2999, 9));
    expect(logChiSquareSurvival(0, 3)).toBe(0);
    expect(logChiSquareSurvival(Infinity, 3)).toBe(-Infinity);
    expect(() => logChiSquareSurvival(Number.NaN, 3)).toThrow("x must be a number (not NaN)");
  });
});

describe("chiSquareQuantile and chiSquareUpperQuantile", () => {
  it("invert the cdf and the survival function to 1e-12 relative in x over arbitrary p and dof", () => {
    fc.assert(
      fc.property(fc.integer({ min: 1, max: 400 }), fc.double({ min: 1e-300, max: 0.999999, noNaN: true }), (dof, p) => {
        const x = chiSquareQuantile(p, dof);
        const xUpper = chiSquareUpperQuantile(p, dof);
        // Compare in x: the density at the solution converts the probability error into an x error.
        const check = (value: number, f: (v: number) => number, target: number, label: string) => {
          if (value === 0) return; // true underflow of x (e.g. p = 1e-300 with dof 1)
          const low = f(value * (1 - 1e-12));
          const high = f(value * (1 + 1e-12));
          const inside = (low - target) * (high - target) <= 0;
          if (!inside) throw new Error(`${label}: x = ${value} does not bracket p = ${target} within 1e-12 (${low}, ${high})`);
        };
        check(x, (v) => chiSquareCdf(v, dof), p, `quantile dof ${dof}`);
        check(xUpper, (v) => chiSquareSurvival(v, dof), p, `upper quantile dof ${dof}`);
      }),
      { numRuns: 1500 },
    );
  });

  it("handle the extreme tails: p = 1e-300 gives the right x on both sides", () => {
    // Upper: for dof 2, P(χ²₂ > x) = e^{−x/2} exactly, so x = −2 ln q.
    expectClose(chiSquareUpperQuantile(1e-300, 2), -2 * Math.log(1e-300), 1e-14, 0, "dof 2 upper");
    // Lower: for dof 2, P(χ²₂ ≤ x) = 1 − e^{−x/2}, so x = −2·log1p(−p).
    expectClose(chiSquareQuantile(1e-300, 2), -2 * Math.log1p(-1e-300), 1e-14, 0, "dof 2 lower");
    // dof 1: P(χ²₁ ≤ x) ≈ √(2x/π) → x ≈ π/2·p² underflows to 0 for p = 1e-300, and must say so.
    expect(chiSquareQuantile(1e-300, 1)).toBe(0);
    expectClose(chiSquareQuantile(1e-100, 1), (Math.PI / 2) * 1e-200, 1e-13, 0, "dof 1 lower 1e-100");
  });

  it("return the end points for p = 0 and p = 1", () => {
    expect(chiSquareQuantile(0, 4)).toBe(0);
    expect(chiSquareQuantile(1, 4)).toBe(Infinity);
    expect(chiSquareUpperQuantile(1, 4)).toBe(0);
    expect(chiSquareUpperQuantile(0, 4)).toBe(Infinity);
  });

  it("reject probabilities outside [0, 1] and bad dof, naming the argument and the rule", () => {
    expect(() => chiSquareQuantile(1.5, 3)).toThrow("p must be a probability in [0, 1]. Actual: 1.5");
    expect(() => chiSquareQuantile(Number.NaN, 3)).toThrow("p must be a probability in [0, 1]. Actual: NaN");
    expect(() => chiSquareQuantile(0.5, 0)).toThrow("dof must be a positive integer. Actual: 0");
    expect(() => chiSquareUpperQuantile(-0.1, 3)).toThrow("tailProbability must be a probability in [0, 1]. Actual: -0.1");
  });
});

describe("normalQuantile", () => {
  it("squares to the dof-1 column of SciPy's chi-square table, z(1 − α/2)² = χ²₁(α)", () => {
    // reference-data/chi2-upper-critical-values.csv (scipy chi2.isf); SOURCES.md §5 notes that the
    // df = 1 column equals norm.isf(alpha/2)².
    for (const { df, alpha, value } of readCriticalValues("chi2-upper-critical-values.csv")) {
      if (df !== 1) continue;
      expectClose(normalQuantile(alpha / 2) ** 2, value, 1e-14, 0, `alpha ${alpha}`);
      expectClose(normalQuantile(1 - alpha / 2) ** 2, value, 1e-13, 0, `alpha ${alpha} upper`);
    }
  });

  it("agrees with @stdlib's chi-square quantile with 1 dof across the whole range", () => {
    // @stdlib/stats-base-dists-chisquare-quantile: Φ⁻¹(p)² = χ²₁ quantile of 1 − 2p for p < ½.
    for (let i = 1; i <= 400; i++) {
      const q = 1 - Math.pow(10, -12 * (i / 400));
      // p = (1 − q)/2 exactly (Sterbenz), so both sides see the same probability.
      const p = (1 - q) / 2;
      expectClose(normalQuantile(p) ** 2, stdlibChiSquareQuantile(q, 1), 1e-12, 0, `p ${p}`);
    }
  });

  it("is odd about ½ and monotone, and matches the chi-square survival of its square deep in the tail", () => {
    fc.assert(
      fc.property(fc.double({ min: 1e-300, max: 0.5, noNaN: true }), (p) => {
        // 1 − p rounds; compare against the tail it actually represents, 1 − (1 − p) (exact).
        const upper = 1 - p;
        if (upper === 1) return; // p below 1.1e-16: 1 − p is not representable
        const z = normalQuantile(1 - upper);
        expectClose(normalQuantile(upper), -z, 1e-14, 1e-15, `p ${p}`);
        expect(normalQuantile(p)).toBeLessThanOrEqual(normalQuantile(Math.min(0.5, p * 1.01)));
      }),
      { numRuns: 500 },
    );
    for (const p of [1e-300, 1e-200, 1e-50, 1e-10]) {
      const z = normalQuantile(p);
      expectClose(chiSquareSurvival(z * z, 1), 2 * p, 1e-12, 0, `tail p ${p}`);
    }
    expect(normalQuantile(0.5)).toBe(0);
  });

  it("returns ∓Infinity at 0 and 1 and rejects probabilities outside [0, 1]", () => {
    expect(normalQuantile(0)).toBe(-Infinity);
    expect(normalQuantile(1)).toBe(Infinity);
    expect(() => normalQuantile(-0.01)).toThrow("p must be a probability in [0, 1]. Actual: -0.01");
    expect(() => normalQuantile(Number.NaN)).toThrow(RangeError);
  });
});
