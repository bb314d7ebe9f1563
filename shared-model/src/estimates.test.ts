import { describe, expect, it } from "vitest";
import { lnGamma } from "./distributions";
import { EstimateInputError, MIN_AUDIT_FRAUDS, estimateRates } from "./estimates";
import { createRandom } from "./random";
import { mulberry32, type SeededStream } from "./seeded-stream";
import { byTestDepth } from "./test-support";

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
  it("gives Horvitz–Thompson prevalence with the Poisson-sampling variance when the payment count is known", () => {
    const e = estimateRates(HAND, { totalPayments: 100 });
    // T̂_fraud = 3·1 + 1·10 = 13 → prevalence 13/100.
    // v(T̂) = Σ (1 − π)/π² · y² = (1 − 0.1)/0.01 · 1 = 90 (only the audit fraud) → se = √90 / 100.
    expect(e.estimatedFrauds).toBe(13);
    expectClose(e.prevalence.value, 0.13);
    expectClose(e.prevalence.standardError, Math.sqrt(90) / 100);
    // Interval: 3 decided frauds plus 10 × Garwood(k = 1) = 10 × [0.0253178, 5.5716434] (SciPy
    // 1.10.1 scipy.special.gammaincinv(1, 0.025) and gammaincinv(2, 0.975)), over 100 payments.
    // The Wald interval here was 0.13 ± 1.96·0.0949, clipped at 0.
    expectClose(e.prevalence.low, (3 + 10 * 0.025317807984289876) / 100, 1e-9);
    expectClose(e.prevalence.high, (3 + 10 * 5.571643390938898) / 100, 1e-9);
    expect(e.prevalence.exact).toBe(false);
    expect(e.totalPaymentsSource).toBe("given");
  });

  it("linearises recall and precision as ratios of Horvitz–Thompson totals", () => {
    const e = estimateRates(HAND, { totalPayments: 100 });
    // Recall R = T̂(fraud ∧ flagged) / T̂(fraud) = 3/13. z_i = (a_i − R·b_i)/13 is −(3/13)/13 = −3/169
    // for the audit fraud, and flagged rows (π = 1) add nothing: v = 90·(3/169)².
    expectClose(e.recall.value, 3 / 13);
    expectClose(e.recall.standardError, (Math.sqrt(90) * 3) / 169);
    // Interval by monotone mapping of the missed frauds M ∈ 10 × Garwood(1): recall 3/(3 + M).
    expectClose(e.recall.low, 3 / (3 + 10 * 5.571643390938898), 1e-9);
    expectClose(e.recall.high, 3 / (3 + 10 * 0.025317807984289876), 1e-9);
    // Precision among flags: every flag was reviewed (π = 1), a census: 3/5, exact.
    expectClose(e.precision.value, 3 / 5);
    expect(e.precision.standardError).toBe(0);
    expect([e.precision.low, e.precision.high, e.precision.exact]).toEqual([0.6, 0.6, true]);
    // For future traffic the same 3 of 5 is a binomial share. SciPy 1.10.1:
    // scipy.stats.binomtest(3, 5).proportion_ci(0.95, method="wilson") = (0.23072428127601297, 0.8823792257673521).
    expect(e.future.precision.exact).toBe(false);
    expectClose(e.future.precision.low, 0.23072428127601297, 1e-9);
    expectClose(e.future.precision.high, 0.8823792257673521, 1e-9);
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
    expect(e.recall).toEqual({ value: 0.5, standardError: 0, low: 0.5, high: 0.5, exact: true });
    expect(e.prevalence.exact).toBe(true);
  });

  it("never prints a zero-width recall when no audit-sample fraud was missed: nothing seen is not nothing there", () => {
    // 40 flags (30 fraud) decided, and 200 audit draws at rate 0.01 (weight 100), none of them fraud.
    const fraud = [...new Array(30).fill(1), ...new Array(10).fill(0), ...new Array(200).fill(0)];
    const flagged = [...new Array(40).fill(1), ...new Array(200).fill(0)];
    const weights = [...new Array(40).fill(1), ...new Array(200).fill(100)];
    const e = estimateRates({ fraud, flagged, weights }, { totalPayments: 20_040 });
    expect(e.recall.value).toBe(1);
    expect(e.recall.exact).toBe(false);
    // M ≤ 100 × 3.6889 (Garwood, k = 0): recall ≥ 30 / (30 + 368.9). The Wald interval was 100–100 %.
    expectClose(e.recall.low, 30 / (30 + 100 * 3.6888794541139354), 1e-9);
    expect(e.recall.high).toBe(1);
    expect(e.precision.exact).toBe(true);
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
    expect(() => estimateRates({ fraud: [1, 0], flagged: [1, 0], weights: [1, 0.5] })).toThrow("weights[1]: must be a finite number ≥ 1 (1 / inclusion probability). Actual: 0.5");
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
  it("covers the true prevalence, recall and precision with its 95 % intervals at least at the stated rate over 400 audit draws", () => {
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
      const e = estimateRates({ fraud: rows.map((i) => fraud[i]), flagged: rows.map((i) => (score[i] > evalCut ? 1 : 0)), weights }, { totalPayments: N });
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
    // Exact intervals cover at least at the nominal level (Garwood's limits are conservative, and
    // precision here rests on two sampled parts, each at 97.5 %): only the lower end of the band binds.
    for (const key of ["prevalence", "recall", "precision"] as const) {
      expect(covered[key], key).toBeGreaterThanOrEqual(low);
    }
    // About 40 audit frauds per draw: the verdict should almost never call them too few.
    expect(tooFew).toBeLessThanOrEqual(2);
  });
});

describe("estimateRates coverage with few audit-sample frauds", () => {
  it("covers this period's recall, prevalence and precision at least 93 % of the time for audit rates 0.2 %–5 % and recall 0.5–0.99", () => {
    // A fixed period of 50,000 payments with 400 frauds; the live rule flags recall·400 of them and
    // 300 legitimate payments, every flag decided (π = 1). The audit sample draws each unflagged
    // payment independently with probability π. Truth is this period's shares.
    const reps = byTestDepth({ quick: 300, thorough: 2000 });
    const stream = mulberry32(20261204);
    const N = 50_000;
    const frauds = 400;
    const flaggedLegit = 300;
    const rows: string[] = [];
    let worst = 1;
    for (const auditRate of [0.002, 0.005, 0.01, 0.02, 0.05]) {
      for (const trueRecall of [0.5, 0.8, 0.95, 0.99]) {
        const flaggedFraud = Math.round(trueRecall * frauds);
        const missed = frauds - flaggedFraud;
        const unflaggedLegit = N - frauds - flaggedLegit;
        const truth = { recall: flaggedFraud / frauds, prevalence: frauds / N, precision: flaggedFraud / (flaggedFraud + flaggedLegit) };
        const covered = { recall: 0, prevalence: 0, precision: 0 };
        let waldCovered = 0;
        for (let r = 0; r < reps; r++) {
          const k = binomial(stream, missed, auditRate);
          // Legitimate audit draws enter none of the three figures (only that a sample exists), so a
          // normal approximation of their count keeps the test fast.
          const legitDrawn = Math.max(1, Math.round(unflaggedLegit * auditRate + Math.sqrt(unflaggedLegit * auditRate * (1 - auditRate)) * stream.normal()));
          const fraud: number[] = [];
          const flagged: number[] = [];
          const weights: number[] = [];
          const push = (count: number, y: number, f: number, w: number): void => {
            for (let i = 0; i < count; i++) {
              fraud.push(y);
              flagged.push(f);
              weights.push(w);
            }
          };
          push(flaggedFraud, 1, 1, 1);
          push(flaggedLegit, 0, 1, 1);
          push(k, 1, 0, 1 / auditRate);
          push(legitDrawn, 0, 0, 1 / auditRate);
          const e = estimateRates({ fraud, flagged, weights }, { totalPayments: N });
          for (const key of ["recall", "prevalence", "precision"] as const) {
            if (e[key].low! <= truth[key] && truth[key] <= e[key].high!) covered[key]++;
          }
          // The interval used before: Wald on the linearised standard error, clipped to [0, 1].
          const se = e.recall.standardError!;
          if (Math.max(0, e.recall.value! - 1.96 * se) <= truth.recall && truth.recall <= Math.min(1, e.recall.value! + 1.96 * se)) waldCovered++;
        }
        const rate = Math.min(covered.recall, covered.prevalence, covered.precision) / reps;
        worst = Math.min(worst, rate);
        rows.push(
          `π ${auditRate} recall ${trueRecall}: recall ${(covered.recall / reps).toFixed(3)} prevalence ${(covered.prevalence / reps).toFixed(3)} ` +
            `precision ${(covered.precision / reps).toFixed(3)} (Wald recall ${(waldCovered / reps).toFixed(3)})`,
        );
      }
    }
    console.log(`coverage of nominal 95 % intervals over ${reps} audit draws per cell:\n${rows.join("\n")}`);
    expect(worst).toBeGreaterThanOrEqual(0.93);
  });
});

/** Binomial(n, p) by inversion of the cumulative law, one uniform per draw (n·p small: (1 − p)ⁿ must not underflow). */
function binomial(stream: SeededStream, n: number, p: number): number {
  const u = stream.uniformOpen();
  let k = 0;
  let pmf = Math.pow(1 - p, n);
  let cdf = pmf;
  while (u > cdf && k < n) {
    pmf *= ((n - k) / (k + 1)) * (p / (1 - p));
    k++;
    cdf += pmf;
  }
  return k;
}
