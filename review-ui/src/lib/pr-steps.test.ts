import { describe, expect, it } from "vitest";
import { operatingPoints } from "../../../shared-model/src/tuning";
import { createRandom } from "../../../shared-model/src/random";
import { pathArea, prSteps } from "./pr-steps";

describe("prSteps", () => {
  it("draws scikit-learn's documented example as steps whose area is its average precision 0.8333", () => {
    // scikit-learn 1.2.1 (Debian python3-sklearn): precision_recall_curve([0, 0, 1, 1], [0.1, 0.4, 0.35, 0.8])
    //   precision [0.5, 0.6667, 0.5, 1, 1], recall [1, 1, 0.5, 0.5, 0]; average_precision_score 0.8333333333333333.
    const table = operatingPoints([0.1, 0.4, 0.35, 0.8], [0, 0, 1, 1], [1, 1, 1, 1]);
    const path = prSteps(table.points);
    expect(path).toEqual([
      [0, 1],
      [0.5, 1],
      [0.5, 0.5],
      [0.5, 2 / 3],
      [1, 2 / 3],
      [1, 0.5],
    ]);
    expect(pathArea(path)).toBeCloseTo(0.8333333333333333, 14);
    expect(table.averagePrecision).toBeCloseTo(0.8333333333333333, 14);
  });

  it("encloses the average precision printed above it, where straight lines between the points would not", () => {
    // scikit-learn 1.2.1: average_precision_score(y, s) = 0.7470238095238095 for these ten rows;
    // the trapezoid through the same points (what a straight-line plot shows) is larger.
    const y = [1, 0, 1, 1, 0, 0, 1, 0, 0, 0];
    const s = [0.9, 0.8, 0.7, 0.6, 0.55, 0.54, 0.53, 0.52, 0.51, 0.505];
    const table = operatingPoints(
      s,
      y,
      y.map(() => 1),
    );
    expect(pathArea(prSteps(table.points))).toBeCloseTo(0.7470238095238095, 14);
    const straight = table.points.filter((p) => p.precision !== null).map((p) => [p.recall, p.precision!] as [number, number]);
    expect(Math.abs(pathArea([[0, straight[0][1]], ...straight]) - 0.7470238095238095)).toBeGreaterThan(0.01);
  });

  it("matches the average precision of weighted random tables to 1e-12", () => {
    const random = createRandom(42);
    for (let trial = 0; trial < 50; trial++) {
      const m = 5 + Math.floor(random.next() * 60);
      const scores = Array.from({ length: m }, () => Math.round(random.next() * 40) / 2);
      const fraud = scores.map((d) => (random.next() < d / 25 ? 1 : 0));
      if (!fraud.includes(1)) fraud[0] = 1;
      const weights = scores.map(() => (random.next() < 0.3 ? 50 : 1));
      const table = operatingPoints(scores, fraud, weights);
      expect(Math.abs(pathArea(prSteps(table.points)) - table.averagePrecision)).toBeLessThan(1e-12);
    }
  });
});
