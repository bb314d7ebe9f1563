import { describe, expect, it } from "vitest";
import { logDensityAt } from "./log-density";

describe("logDensityAt", () => {
  it("gives the standard normal's log-density at its mean as −ln √(2π)", () => {
    // ln √(2π) = 0.91893853320467274178…, a standard constant (from memory; Math.log(Math.sqrt(2π)) agrees).
    expect(logDensityAt(1, 0, 0)).toBeCloseTo(-0.9189385332046727, 15);
  });

  it("matches the product of independent normal densities for a diagonal covariance", () => {
    // Two independent normals, variances 4 and 0.25, at 1 and 0.5 standard deviations from the mean.
    const variances = [4, 0.25];
    const z = [1, 0.5];
    const byHand = variances.reduce((sum, v, i) => sum + Math.log(Math.exp(-0.5 * z[i] ** 2) / Math.sqrt(2 * Math.PI * v)), 0);
    const logDet = Math.log(variances[0] * variances[1]);
    expect(logDensityAt(2, logDet, z[0] ** 2 + z[1] ** 2)).toBeCloseTo(byHand, 12);
  });
});
