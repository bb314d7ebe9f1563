import fc from "fast-check";
import { describe, expect, it } from "vitest";
import { parseArtifact } from "./artifact";
import { chiSquareSurvival } from "./distributions";
import { fitted, sealedFixture } from "./test-support";
import { TuningInputError, cutoffForms, cutoffModelOf, expectedCost, operatingPoints, pointAtCutoff, pointAtFlagRate, retuneArtifact, tuneCutoff } from "./tuning";

const LN_2PI = Math.log(2 * Math.PI);

/** Relative difference, printed on failure. */
function expectClose(actual: number, expected: number, tolerance = 1e-12): void {
  const diff = Math.abs(actual - expected) / Math.max(1, Math.abs(expected));
  expect(diff, `actual ${actual}, expected ${expected}, relative difference ${diff}`).toBeLessThanOrEqual(tolerance);
}

/** Rows flagged by d² > cutoff, counted directly (the brute-force reference of the tests). */
function countAt(scores: number[], labels: boolean[], weights: number[], cutoff: number) {
  let tp = 0;
  let fp = 0;
  let fn = 0;
  let tn = 0;
  scores.forEach((s, i) => {
    const flagged = s > cutoff;
    if (labels[i] && flagged) tp += weights[i];
    else if (labels[i]) fn += weights[i];
    else if (flagged) fp += weights[i];
    else tn += weights[i];
  });
  return { tp, fp, fn, tn, total: tp + fp + fn + tn };
}

/** Every cutoff that gives a different flagged set: each distinct score, and one below the lowest. */
function everyCutoff(scores: number[]): number[] {
  const distinct = [...new Set(scores)].sort((a, b) => a - b);
  const below = distinct[0] > 0 ? [distinct[0] / 2] : [];
  return [...below, ...distinct];
}

/** Labelled sets with at least one fraud: scores from a small grid (so ties happen), weights 1–5. */
const labelledSet = fc
  .array(
    fc.record({
      score: fc.integer({ min: 0, max: 40 }).map((k) => k / 4),
      fraud: fc.boolean(),
      weight: fc.integer({ min: 1, max: 5 }),
    }),
    { minLength: 1, maxLength: 60 },
  )
  .filter((rows) => rows.some((r) => r.fraud));

describe("operatingPoints against scikit-learn's documented example", () => {
  // Outside reference: scikit-learn User Guide, "Precision, recall and F-measures"
  // (doc/modules/model_evaluation.rst, 1.x) and the docstring of sklearn.metrics.average_precision_score:
  // y_true = [0, 0, 1, 1], y_scores = [0.1, 0.4, 0.35, 0.8] →
  // precision [0.5, 0.66…, 0.5, 1, 1], recall [1, 1, 0.5, 0.5, 0], thresholds [0.1, 0.35, 0.4, 0.8],
  // average_precision_score = 0.83… (confirmed with the search tool in the scikit-learn sources).
  const table = operatingPoints([0.1, 0.4, 0.35, 0.8], [0, 0, 1, 1]);

  it("reproduces precision_recall_curve's precision, recall and thresholds", () => {
    expect(table.curve.thresholds).toEqual([0.1, 0.35, 0.4, 0.8]);
    expect(table.curve.recall).toEqual([1, 1, 0.5, 0.5, 0]);
    table.curve.precision.forEach((p, i) => expectClose(p, [0.5, 2 / 3, 0.5, 1, 1][i]));
  });

  it("reproduces average_precision_score = 0.8333… (step-wise, not interpolated)", () => {
    // Step-wise by hand: 0.5·1 + 0·0.5 + 0.5·(2/3) + 0·0.5 = 5/6.
    expectClose(table.averagePrecision, 5 / 6);
    expect(table.averagePrecision.toFixed(2)).toBe("0.83");
  });

  it("gives the trapezoidal area 0.79… that scikit-learn documented for the same example before version 0.19", () => {
    // Outside reference: scikit-learn 0.13–0.18 docstring of average_precision_score printed 0.79…
    // for this example; it then used auc(recall, precision), the trapezoidal rule (changed in 0.19).
    // By hand: (1+1)/2·0.5 + 0 + (0.5+2/3)/2·0.5 + 0 = 0.5 + 0.291666… = 0.791666…
    expectClose(table.trapezoidArea, 0.5 + (0.5 + 2 / 3) / 4);
    expect(table.trapezoidArea.toFixed(2)).toBe("0.79");
  });

  it("lists the operating points from flag-nothing to flag-everything with cutoffs between the scores", () => {
    expect(table.points.map((p) => p.flaggedRows)).toEqual([0, 1, 2, 3, 4]);
    // Midpoints between neighbouring scores: (0.8+0.4)/2, (0.4+0.35)/2, (0.35+0.1)/2, 0.1/2.
    table.points.forEach((p, i) => expectClose(p.mahalanobisSq, [0.8, 0.6, 0.375, 0.225, 0.05][i]));
    expect(table.points.map((p) => p.precision)).toEqual([null, 1, 0.5, 2 / 3, 0.5]);
    expect(table.points.map((p) => p.recall)).toEqual([0, 0.5, 0.5, 1, 1]);
    expect(table.points.map((p) => p.flagRate)).toEqual([0, 0.25, 0.5, 0.75, 1]);
    // F1 = 2·TP / (2·TP + FP + FN): 0, 2/3, 1/2, 4/5, 2/3.
    table.points.forEach((p, i) => expectClose(p.f1, [0, 2 / 3, 0.5, 0.8, 2 / 3][i]));
    expect(table.points[3]).toMatchObject({ truePositives: 2, falsePositives: 1, falseNegatives: 0, trueNegatives: 1, lowestFlagged: 0.35 });
  });
});

describe("operatingPoints", () => {
  it("counts a row of weight k exactly as k copies of it, for every point and for AP", () => {
    fc.assert(
      fc.property(labelledSet, (rows) => {
        const weighted = operatingPoints(
          rows.map((r) => r.score),
          rows.map((r) => r.fraud),
          rows.map((r) => r.weight),
        );
        const copies = rows.flatMap((r) => Array.from({ length: r.weight }, () => r));
        const replicated = operatingPoints(
          copies.map((r) => r.score),
          copies.map((r) => r.fraud),
        );
        expect(weighted.points.length).toBe(replicated.points.length);
        weighted.points.forEach((p, k) => {
          const q = replicated.points[k];
          expect(p.mahalanobisSq).toBe(q.mahalanobisSq);
          expectClose(p.recall, q.recall, 1e-12);
          expectClose(p.flagRate, q.flagRate, 1e-12);
          expectClose(p.f1, q.f1, 1e-12);
        });
        expectClose(weighted.averagePrecision, replicated.averagePrecision, 1e-12);
      }),
    );
  });

  it("agrees with direct counting of d² > cutoff at every point", () => {
    fc.assert(
      fc.property(labelledSet, (rows) => {
        const scores = rows.map((r) => r.score);
        const labels = rows.map((r) => r.fraud);
        const weights = rows.map((r) => r.weight);
        const table = operatingPoints(scores, labels, weights);
        for (const p of table.points) {
          const c = countAt(scores, labels, weights, p.mahalanobisSq);
          expect(p.truePositives).toBe(c.tp);
          expect(p.falsePositives).toBe(c.fp);
          expect(p.falseNegatives).toBe(c.fn);
          expect(p.trueNegatives).toBe(c.tn);
          expect(p.flaggedRows).toBe(scores.filter((s) => s > p.mahalanobisSq).length);
        }
      }),
    );
  });

  it("leaves out the flag-everything point when the smallest d² is exactly 0, since d² > cutoff ≥ 0 cannot flag it", () => {
    const table = operatingPoints([0, 2, 5], [false, true, false]);
    expect(table.points.map((p) => p.flaggedRows)).toEqual([0, 1, 2]);
    expect(table.curve.thresholds).toEqual([0, 2, 5]);
  });

  it("refuses mismatched lengths, bad scores, labels and weights, and a set without fraud, naming the field", () => {
    const attempt = (f: () => unknown): TuningInputError => {
      try {
        f();
      } catch (error) {
        expect(error).toBeInstanceOf(TuningInputError);
        return error as TuningInputError;
      }
      throw new Error("expected a TuningInputError");
    };
    expect(attempt(() => operatingPoints([], [])).field).toBe("scores");
    expect(attempt(() => operatingPoints([1, 2], [true])).message).toBe("labels: must have one label per score (2). Actual: 1");
    expect(attempt(() => operatingPoints([1, -2], [true, false])).field).toBe("scores[1]");
    expect(attempt(() => operatingPoints([1, Number.NaN], [true, false])).field).toBe("scores[1]");
    expect(attempt(() => operatingPoints([1, 2], [true, 2])).field).toBe("labels[1]");
    expect(attempt(() => operatingPoints([1, 2], [true, false], [1, 0])).field).toBe("weights[1]");
    expect(attempt(() => operatingPoints([1, 2], [true, false], [1])).field).toBe("weights");
    expect(attempt(() => operatingPoints([1, 2], [false, false])).rule).toContain("at least one payment labelled fraud");
  });
});

describe("pointAtCutoff and pointAtFlagRate", () => {
  it("give the figures of any cutoff as direct counting does", () => {
    fc.assert(
      fc.property(
        labelledSet,
        fc.integer({ min: 0, max: 44 }).map((k) => k / 4 - 0.125),
        (rows, raw) => {
          const cutoff = Math.max(0, raw);
          const scores = rows.map((r) => r.score);
          const labels = rows.map((r) => r.fraud);
          const weights = rows.map((r) => r.weight);
          const p = pointAtCutoff(operatingPoints(scores, labels, weights), cutoff);
          const c = countAt(scores, labels, weights, cutoff);
          expect(p.mahalanobisSq).toBe(cutoff);
          expect([p.truePositives, p.falsePositives, p.falseNegatives, p.trueNegatives]).toEqual([c.tp, c.fp, c.fn, c.tn]);
        },
      ),
    );
  });

  it("picks the loosest point whose flag rate stays within the rate asked", () => {
    const table = operatingPoints([0.1, 0.4, 0.35, 0.8], [0, 0, 1, 1]);
    expect(pointAtFlagRate(table, 0.6).flaggedRows).toBe(2);
    expect(pointAtFlagRate(table, 0.75).flaggedRows).toBe(3);
    expect(pointAtFlagRate(table, 0).flaggedRows).toBe(0);
    expect(() => pointAtFlagRate(table, 1.5)).toThrow("flagRate: must be a share between 0 and 1. Actual: 1.5");
    expect(() => pointAtCutoff(table, -1)).toThrow(TuningInputError);
  });
});

describe("tuneCutoff", () => {
  const model = { n: 3, logDet: { "*": 1.25, web: 0.5 } };

  it("maximises F1, checked by brute force over every cutoff", () => {
    fc.assert(
      fc.property(labelledSet, (rows) => {
        const scores = rows.map((r) => r.score);
        const labels = rows.map((r) => r.fraud);
        const weights = rows.map((r) => r.weight);
        const tuned = tuneCutoff(operatingPoints(scores, labels, weights), model, { kind: "f1" });
        let best = 0;
        for (const cutoff of everyCutoff(scores)) {
          const c = countAt(scores, labels, weights, cutoff);
          best = Math.max(best, c.tp > 0 ? (2 * c.tp) / (2 * c.tp + c.fp + c.fn) : 0);
        }
        expectClose(tuned.point.f1, best, 1e-12);
      }),
    );
  });

  it("never exceeds the analysts' capacity and finds the best recall that fits it", () => {
    fc.assert(
      fc.property(labelledSet, fc.integer({ min: 0, max: 2000 }), fc.integer({ min: 1, max: 20000 }), (rows, reviewsPerDay, paymentsPerDay) => {
        const scores = rows.map((r) => r.score);
        const labels = rows.map((r) => r.fraud);
        const weights = rows.map((r) => r.weight);
        const table = operatingPoints(scores, labels, weights);
        const tuned = tuneCutoff(table, model, { kind: "capacity", reviewsPerDay, paymentsPerDay });
        // The promise: expected flags per day at the chosen cutoff fit the capacity.
        expect(tuned.expectedDailyFlags!).toBeLessThanOrEqual(reviewsPerDay);
        const c = countAt(scores, labels, weights, tuned.cutoff.mahalanobisSq);
        expect(((c.tp + c.fp) / c.total) * paymentsPerDay).toBeLessThanOrEqual(reviewsPerDay);
        // And nothing that fits does better (brute force over every cutoff).
        for (const cutoff of everyCutoff(scores)) {
          const other = countAt(scores, labels, weights, cutoff);
          if (((other.tp + other.fp) / other.total) * paymentsPerDay <= reviewsPerDay) {
            expect(other.tp / (other.tp + other.fn)).toBeLessThanOrEqual(tuned.point.recall + 1e-12);
          }
        }
      }),
    );
  });

  it("finds the least expected cost, checked by brute force over every cutoff", () => {
    fc.assert(
      fc.property(
        labelledSet,
        fc.integer({ min: 0, max: 50 }),
        fc.integer({ min: 0, max: 500 }),
        fc.integer({ min: 0, max: 20 }),
        (rows, reviewCost, missedFraudCost, frictionCost) => {
          const scores = rows.map((r) => r.score);
          const labels = rows.map((r) => r.fraud);
          const weights = rows.map((r) => r.weight);
          const table = operatingPoints(scores, labels, weights);
          const tuned = tuneCutoff(table, model, { kind: "cost", reviewCost, missedFraudCost, frictionCost, paymentsPerDay: 1000 });
          let least = Infinity;
          for (const cutoff of everyCutoff(scores)) {
            const c = countAt(scores, labels, weights, cutoff);
            least = Math.min(least, (missedFraudCost * c.fn + reviewCost * (c.tp + c.fp) + frictionCost * c.fp) / c.total);
          }
          expectClose(tuned.expectedCost!.perPayment, least, 1e-12);
          expectClose(tuned.expectedCost!.perDay!, least * 1000, 1e-12);
        },
      ),
    );
  });

  it("prefers the stricter cutoff when two points tie, and returns the cutoff in all three forms", () => {
    // Two frauds on top, then a legitimate row: F1 is 1 at two flags; capacity of 0 flags nothing.
    const table = operatingPoints([9, 8, 1], [true, true, false]);
    const f1 = tuneCutoff(table, model, { kind: "f1" });
    expect(f1.point.flaggedRows).toBe(2);
    expect(f1.cutoff.mahalanobisSq).toBe(4.5);
    expect(f1.cutoff.tailProbability).toBe(chiSquareSurvival(4.5, 3));
    expectClose(f1.cutoff.logDensity.web, -0.5 * (3 * LN_2PI + 0.5 + 4.5));
    expectClose(f1.cutoff.logDensity["*"], -0.5 * (3 * LN_2PI + 1.25 + 4.5));
    const none = tuneCutoff(table, model, { kind: "capacity", reviewsPerDay: 0, paymentsPerDay: 100 });
    expect(none.point.flaggedRows).toBe(0);
    expect(none.expectedDailyFlags).toBe(0);
    // Missing a fraud costs less than reviewing: flag nothing.
    const cheap = tuneCutoff(table, model, { kind: "cost", reviewCost: 10, missedFraudCost: 5, frictionCost: 0 });
    expect(cheap.point.flaggedRows).toBe(0);
    expect(cheap.expectedCost).toEqual({ perPayment: 10 / 3, perDay: null });
  });

  it("refuses an unknown objective and bad capacities or costs, naming the field", () => {
    const table = operatingPoints([9, 8, 1], [true, true, false]);
    expect(() => tuneCutoff(table, model, { kind: "recall" } as never)).toThrow("objective.kind: must be f1, capacity or cost. Actual: recall");
    expect(() => tuneCutoff(table, model, { kind: "capacity", reviewsPerDay: -1, paymentsPerDay: 10 })).toThrow("reviewsPerDay");
    expect(() => tuneCutoff(table, model, { kind: "capacity", reviewsPerDay: 5, paymentsPerDay: 0 })).toThrow("paymentsPerDay");
    expect(() => tuneCutoff(table, model, { kind: "cost", reviewCost: Number.NaN, missedFraudCost: 1, frictionCost: 0 })).toThrow("reviewCost");
    expect(() => expectedCost(table.points[0], { kind: "cost", reviewCost: 1, missedFraudCost: -5, frictionCost: 0 }, 3)).toThrow("missedFraudCost");
    expect(() => cutoffForms({ n: 0, logDet: {} }, 1)).toThrow("n: must be a positive integer");
  });
});

describe("retuneArtifact", () => {
  async function fixture() {
    return sealedFixture({
      features: [fitted("amount", "log"), fitted("items", "log1p")],
      segments: {
        "*": { mean: [3.6, 1.1], covariance: [0.5, 0.1, 0.1, 0.3] },
        web: { mean: [3.8, 1.2], covariance: [0.45, 0.05, 0.05, 0.25] },
      },
      cutoffMahalanobisSq: 9.21,
    });
  }

  it("writes a new version with the same parameters and a new cutoff that parseArtifact accepts", async () => {
    const live = await fixture();
    const tuned = await retuneArtifact(live, 12.5, "f1", 0.004, { createdAt: "2026-12-08T07:00:00Z" });
    expect(await parseArtifact(JSON.parse(JSON.stringify(tuned)))).toEqual(tuned);
    expect(tuned.version).toMatch(/^m20261208-[0-9a-f]{8}$/);
    expect(tuned.version).not.toBe(live.version);
    expect(tuned.segments).toEqual(live.segments);
    expect(tuned.features).toEqual(live.features);
    expect(tuned.reference).toEqual(live.reference);
    expect(tuned.training).toEqual(live.training);
    expect(tuned.cutoff).toEqual({
      mahalanobisSq: 12.5,
      tailProbability: chiSquareSurvival(12.5, 2),
      logDensity: {
        "*": -0.5 * (2 * LN_2PI + live.segments["*"].logDet + 12.5),
        web: -0.5 * (2 * LN_2PI + live.segments.web.logDet + 12.5),
      },
      basis: "f1",
      flagRate: 0.004,
    });
    expect(cutoffModelOf(tuned)).toEqual({ n: 2, logDet: { "*": live.segments["*"].logDet, web: live.segments.web.logDet } });
  });

  it("derives the version from the content: the same cutoff gives the same id, another cutoff another id", async () => {
    const live = await fixture();
    const a = await retuneArtifact(live, 12.5, "cost", null, { createdAt: "2026-12-08T07:00:00Z" });
    const b = await retuneArtifact(live, 12.5, "cost", null, { createdAt: "2026-12-08T07:00:00Z" });
    const c = await retuneArtifact(live, 12.6, "cost", null, { createdAt: "2026-12-08T07:00:00Z" });
    expect(a.version).toBe(b.version);
    expect(a.checksum).toBe(b.checksum);
    expect(c.version).not.toBe(a.version);
  });

  it("refuses a bad cutoff, basis, flag rate or time stamp, naming the field", async () => {
    const live = await fixture();
    await expect(retuneArtifact(live, -1, "f1", null)).rejects.toThrow("cutoffMahalanobisSq: must be a finite number ≥ 0. Actual: -1");
    await expect(retuneArtifact(live, 5, "guess" as never, null)).rejects.toThrow("basis: must be one of flag-rate, f1, capacity, cost, manual");
    await expect(retuneArtifact(live, 5, "flag-rate", null)).rejects.toThrow('flagRate: is required when basis is "flag-rate"');
    await expect(retuneArtifact(live, 5, "manual", 2)).rejects.toThrow("flagRate: must be a share between 0 and 1");
    await expect(retuneArtifact(live, 5, "manual", null, { createdAt: "yesterday" })).rejects.toThrow("createdAt");
  });
});
