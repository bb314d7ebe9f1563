import { describe, expect, it } from "vitest";
import { lnGamma } from "./distributions";
import { EstimateInputError, MIN_AUDIT_FRAUDS, estimateRates } from "./estimates";
import { createRandom } from "./random";

function expectClose(actual: number | null, expected: number, tolerance = 1e-12): void {
  expect(actual).not.toBeNull();
  const diff = Math.abs(actual! - expected) / Math.max(1e-300, Math.abs(expected));
  expect(diff, `actual ${actual}, expected ${expected}, relative difference ${diff}`).toBeLessThanOrEqual(tolerance);
}

/**
 * A small review set worked by hand: 5 flags (π = 1; 3 fraud, 2 legitimate) and an audit sample at
 * rate 0.1 (weight 10) of 5 unflagged payments, 1 of them fraud. 100 payments were scored.
 */
const HAND = {
  fraud: [1, 1, 1, 0, 0, 1, 0, 0, 0, 0],
  flagged: [1, 1, 1, 1, 1, 0, 0, 0, 0, 0],
  weights: [1, 1, 1, 1, 1, 10, 10, 10, 10, 10],
};

describe("estimateRates on a review set worked by hand", () => {
  const z = 1.959963984540054; // Φ⁻¹(0.975)

  it("gives Horvitz–Thompson prevalence with the Poisson-sampling variance when the payment count is known", () => {
    const e = estimateRates(HAND, { totalPayments: 100 });
    // T̂_fraud = 3·1 + 1·10 = 13 → prevalence 13/100.
    // v(T̂) = Σ (1 − π)/π² · y² = (1 − 0.1)/0.01 · 1 = 90 (only the audit fraud) → se = √90 / 100.
    expect(e.estimatedFrauds).toBe(13);
    expectClose(e.prevalence.value, 0.13);
    expectClose(e.prevalence.standardError, Math.sqrt(90) / 100);
    // 0.13 − 1.96·0.0949 < 0: the interval is clipped at 0.
    expect(e.prevalence.low).toBe(0);
    expectClose(e.prevalence.high, 0.13 + z * (Math.sqrt(90) / 100));
    expect(e.totalPaymentsSource).toBe("given");
  });

  it("linearises recall and precision as ratios of Horvitz–Thompson totals", () => {
    const e = estimateRates(HAND, { totalPayments: 100 });
    // Recall R = T̂(fraud ∧ flagged) / T̂(fraud) = 3/13. z_i = (a_i − R·b_i)/13 is −(3/13)/13 = −3/169
    // for the audit fraud, and flagged rows (π = 1) add nothing: v = 90·(3/169)².
    expectClose(e.recall.value, 3 / 13);
    expectClose(e.recall.standardError, (Math.sqrt(90) * 3) / 169);
    // Precision among flags: every flag was reviewed (π = 1), a census: 3/5 with no sampling error.
    expectClose(e.precision.value, 3 / 5);
    expect(e.precision.standardError).toBe(0);
    expect([e.precision.low, e.precision.high]).toEqual([0.6, 0.6]);
    expect(e.estimatedFlags).toBe(5);
  });

  it("estimates the payment count as Σ weights and prevalence as a ratio when the count is not given", () => {
    const e = estimateRates(HAND);
    // N̂ = 5 + 50 = 55; prevalence 13/55; z_i = (y_i − (13/55)·1)/55 for the five audit rows (w = 10).
    const r = 13 / 55;
    const v = 90 * (((1 - r) / 55) ** 2 + 4 * ((0 - r) / 55) ** 2);
    expect(e.totalPayments).toBe(55);
    expect(e.totalPaymentsSource).toBe("estimated");
    expectClose(e.prevalence.value, r);
    expectClose(e.prevalence.standardError, Math.sqrt(v));
  });

  it("says the labels are too few when fewer than ten audit-sample frauds stand behind the estimates", () => {
    const e = estimateRates(HAND, { totalPayments: 100 });
    expect(MIN_AUDIT_FRAUDS).toBe(10);
    expect(e.auditFrauds).toBe(1);
    expect(e.effectiveAuditFrauds).toBe(1);
    expect(e.tooFewLabels).toBe(true);
    expect(e.reasons).toEqual([
      "only 1 effective audit-sample frauds (1 rows); at least 10 are needed before the missed-fraud part of recall and prevalence, and its interval, can be trusted",
    ]);
    expect(estimateRates(HAND, { totalPayments: 100, minAuditFrauds: 1 }).tooFewLabels).toBe(false);
  });
});

describe("estimateRates verdicts", () => {
  it("treats labels that are all weight 1 and cover every payment as an exact census", () => {
    const e = estimateRates({ fraud: [1, 0, 0, 1], flagged: [1, 1, 0, 0], weights: [1, 1, 1, 1] });
    expect(e.tooFewLabels).toBe(false);
    expect(e.recall).toEqual({ value: 0.5, standardError: 0, low: 0.5, high: 0.5 });
  });

  it("refuses to speak for unreviewed traffic when no label comes from an audit sample", () => {
    const e = estimateRates({ fraud: [1, 0, 1], flagged: [1, 1, 1], weights: [1, 1, 1] }, { totalPayments: 5000 });
    expect(e.tooFewLabels).toBe(true);
    expect(e.reasons[0]).toContain("the labels cover 3 of 5000 payments and none comes from an audit sample");
  });

  it("reports no fraud at all as a reason and leaves recall undefined", () => {
    const e = estimateRates({ fraud: [0, 0], flagged: [1, 0], weights: [1, 20] }, { totalPayments: 21 });
    expect(e.recall.value).toBeNull();
    expect(e.reasons[0]).toContain("no label is fraud");
  });

  it("counts audit frauds of unequal weight by Kish's effective number (Σw)²/Σw²", () => {
    const e = estimateRates({ fraud: [1, 1, 1], flagged: [0, 0, 0], weights: [2, 2, 8] });
    // (2 + 2 + 8)² / (4 + 4 + 64) = 144 / 72 = 2.
    expect(e.effectiveAuditFrauds).toBe(2);
  });

  it("refuses bad inputs, naming the field and the rule", () => {
    expect(() => estimateRates({ fraud: [], flagged: [], weights: [] })).toThrow(EstimateInputError);
    expect(() => estimateRates({ fraud: [1], flagged: [1, 0], weights: [1] })).toThrow("flagged: must have one entry per label (1). Actual: 2");
    expect(() => estimateRates({ fraud: [1, 0], flagged: [1, 0], weights: [1, 0.5] })).toThrow(
      "weights[1]: must be a finite number ≥ 1 (1 / inclusion probability). Actual: 0.5",
    );
    expect(() => estimateRates({ fraud: [1, 2], flagged: [1, 0], weights: [1, 1] })).toThrow("fraud[1]: must be true/1 or false/0");
    expect(() => estimateRates(HAND, { totalPayments: 3 })).toThrow("totalPayments: must be a finite number ≥ the labelled rows (10)");
    expect(() => estimateRates(HAND, { confidence: 95 })).toThrow("confidence");
  });
});

/** P(X ≤ k) for X ~ Binomial(n, p), summed from log-pmfs. */
function binomialCdf(k: number, n: number, p: number): number {
  let total = 0;
  for (let i = 0; i <= k; i++) {
    total += Math.exp(lnGamma(n + 1) - lnGamma(i + 1) - lnGamma(n - i + 1) + i * Math.log(p) + (n - i) * Math.log(1 - p));
  }
  return total;
}

describe("estimateRates on a simulated population with known truth", () => {
  it("covers the true prevalence, recall and precision with its 95 % intervals at about the stated rate over 400 audit draws", () => {
    // An invented population of 100,000 payments, fixed once: 1 % fraud, fraud scores higher.
    const random = createRandom(20261208);
    const normal = (): number => Math.sqrt(-2 * Math.log(1 - random.next())) * Math.cos(2 * Math.PI * random.next());
    const N = 100_000;
    const fraud = new Uint8Array(N);
    const score = new Float64Array(N);
    for (let i = 0; i < N; i++) {
      fraud[i] = random.next() < 0.01 ? 1 : 0;
      score[i] = normal() + 2.4 * fraud[i];
    }
    // The live rule flagged score > 2.6 (every flag reviewed, π = 1); the rule under evaluation is
    // looser (score > 2.0), so its extra flags are seen only through the audit sample.
    const liveCut = 2.6;
    const evalCut = 2.0;
    let frauds = 0;
    let evalFlags = 0;
    let evalFlaggedFrauds = 0;
    for (let i = 0; i < N; i++) {
      frauds += fraud[i];
      if (score[i] > evalCut) {
        evalFlags++;
        evalFlaggedFrauds += fraud[i];
      }
    }
    const truth = { prevalence: frauds / N, recall: evalFlaggedFrauds / frauds, precision: evalFlaggedFrauds / evalFlags };

    const unflagged: number[] = [];
    const flaggedRows: number[] = [];
    for (let i = 0; i < N; i++) (score[i] > liveCut ? flaggedRows : unflagged).push(i);
    const auditRate = 0.1;
    const reps = 400;
    const covered = { prevalence: 0, recall: 0, precision: 0 };
    let tooFew = 0;
    const draw = createRandom(7);
    for (let r = 0; r < reps; r++) {
      const rows = [...flaggedRows];
      const weights = flaggedRows.map(() => 1);
      // Poisson sampling with equal π by geometric skips: gap − 1 ~ Geometric(π), exact and O(sample).
      const logQ = Math.log(1 - auditRate);
      for (let k = Math.floor(Math.log(1 - draw.next()) / logQ); k < unflagged.length; k += 1 + Math.floor(Math.log(1 - draw.next()) / logQ)) {
        rows.push(unflagged[k]);
        weights.push(1 / auditRate);
      }
      const e = estimateRates(
        { fraud: rows.map((i) => fraud[i]), flagged: rows.map((i) => (score[i] > evalCut ? 1 : 0)), weights },
        { totalPayments: N },
      );
      if (e.tooFewLabels) tooFew++;
      for (const key of ["prevalence", "recall", "precision"] as const) {
        if (e[key].low! <= truth[key] && truth[key] <= e[key].high!) covered[key]++;
      }
    }
    // Acceptance band from Binomial(400, 0.95): outside it with probability < 0.001 each if the
    // intervals cover at exactly 95 %. Computed here rather than copied, so the rule is visible.
    let low = 0;
    while (binomialCdf(low, reps, 0.95) <= 0.0005) low++;
    let high = low;
    while (binomialCdf(high, reps, 0.95) < 0.9995) high++;
    console.log(
      `coverage over ${reps} audit draws (band ${low}–${high}): prevalence ${covered.prevalence}, recall ${covered.recall}, precision ${covered.precision}; ` +
        `truth ${JSON.stringify(truth)}; too-few verdicts ${tooFew}`,
    );
    expect(low).toBeGreaterThanOrEqual(360);
    expect(high).toBeLessThanOrEqual(395);
    for (const key of ["prevalence", "recall", "precision"] as const) {
      expect(covered[key], key).toBeGreaterThanOrEqual(low);
      expect(covered[key], key).toBeLessThanOrEqual(high);
    }
    // About 40 audit frauds per draw: the verdict should almost never call them too few.
    expect(tooFew).toBeLessThanOrEqual(2);
  });
});
