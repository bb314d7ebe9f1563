import { describe, expect, it } from "vitest";
import quantile from "@stdlib/stats-base-dists-chisquare-quantile";
import type { FittedFeature } from "../../../shared-model/src/types";
import { ELLIPSE_LEVELS, ellipsePoints, pairDomain, rawTicks, toModelUnits } from "./plot";

const amount: FittedFeature = { name: "amount", transform: "log", columns: ["amount"] };
const items: FittedFeature = { name: "items", transform: "log1p", columns: ["items"] };
const share: FittedFeature = { name: "shippingShare", transform: "none", columns: ["shippingShare"] };

describe("equal-density ellipses", () => {
  it("put every point at squared Mahalanobis distance χ²₂(level) from the mean (checked against @stdlib)", () => {
    const mean: [number, number] = [4.1, 0.9];
    const cov: [[number, number], [number, number]] = [
      [0.36, 0.12],
      [0.12, 0.25],
    ];
    const det = cov[0][0] * cov[1][1] - cov[0][1] * cov[1][0];
    for (const level of ELLIPSE_LEVELS) {
      // @stdlib's χ² quantile is an independent implementation; for 2 degrees of freedom it is also −2 ln(1 − p).
      const radiusSq = quantile(level, 2);
      expect(Math.abs(radiusSq - -2 * Math.log(1 - level))).toBeLessThan(1e-9);
      for (const [x, y] of ellipsePoints(mean, cov, level)) {
        const dx = x - mean[0];
        const dy = y - mean[1];
        const d2 = (cov[1][1] * dx * dx - 2 * cov[0][1] * dx * dy + cov[0][0] * dy * dy) / det;
        expect(Math.abs(d2 - radiusSq) / radiusSq).toBeLessThan(1e-9);
      }
    }
  });

  it("close the ring: the last point is the first", () => {
    const ring = ellipsePoints(
      [0, 0],
      [
        [1, 0],
        [0, 4],
      ],
      0.9,
    );
    expect(ring).toHaveLength(97);
    expect(ring[96][0]).toBeCloseTo(ring[0][0], 12);
    expect(ring[96][1]).toBeCloseTo(ring[0][1], 12);
  });
});

describe("axis ticks in raw units", () => {
  it("place round amounts (1, 2, 5 × 10ᵏ) at their logarithm on a log-transformed axis", () => {
    const ticks = rawTicks(amount, [Math.log(8), Math.log(3000)]);
    expect(ticks.map((t) => t.raw)).toEqual(expect.arrayContaining([10, 100, 1000]));
    for (const t of ticks) {
      expect(t.model).toBeCloseTo(Math.log(t.raw), 12);
      expect(String(t.raw)).toMatch(/^[125]0*$/);
    }
    const gaps = ticks.slice(1).map((t, k) => t.model - ticks[k].model);
    for (const gap of gaps) expect(gap).toBeGreaterThanOrEqual(0.14 * (Math.log(3000) - Math.log(8)) - 1e-12);
  });

  it("include zero on a log1p axis that reaches it and leave an untransformed axis to linear ticks", () => {
    expect(rawTicks(items, [-0.2, Math.log1p(40)]).map((t) => t.raw)).toContain(0);
    expect(rawTicks(share, [0, 0.5]).map((t) => t.raw)).toEqual([0, 0.1, 0.2, 0.3, 0.4, 0.5]);
    expect(toModelUnits(items, 9)).toBeCloseTo(Math.log(10), 12);
  });

  it("pad the domain around the outer ellipse and the payment", () => {
    const [lo, hi] = pairDomain(
      [
        [0, 0],
        [10, 1],
      ],
      [20, 0],
      0,
    );
    expect(lo).toBeLessThan(0);
    expect(hi).toBeGreaterThan(20);
  });
});
