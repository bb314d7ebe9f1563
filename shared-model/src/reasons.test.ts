import { Matrix, inverse } from "ml-matrix";
import { describe, expect, it } from "vitest";
import { buildSegment } from "./artifact";
import { normalQuantile } from "./distributions";
import { hourFromCyclic } from "./features";
import { fromRows } from "./linalg";
import { createRandom } from "./random";
import { conditionalColumn, conditionalPair, conditionalReasons, cyclicHourRange } from "./reasons";
import { fitted } from "./test-support";
import type { FittedFeature, SegmentModel } from "./types";

const LN_2PI = Math.log(2 * Math.PI);
const Z = normalQuantile(0.975);

/** A SegmentModel from a hand-made Gaussian, through the real segment builder. */
function segmentOf(mean: number[], cov: number[]): SegmentModel {
  const n = mean.length;
  const s = buildSegment(Float64Array.from(mean), Float64Array.from(cov), n, 100, { estimator: "classical", denominator: "m" });
  return {
    key: "*",
    rows: s.rows,
    n,
    mean: Float64Array.from(s.mean),
    covariance: fromRows(s.covariance),
    precision: fromRows(s.precision),
    logDet: s.logDet,
    logNormalizer: -0.5 * (n * LN_2PI + s.logDet),
  };
}

/**
 * Independent route: the covariance-partition formulas (Bishop 2006, PRML §2.3.1, eqs. 2.81–2.82)
 * E[x_B | x_A] = μ_B + Σ_BA Σ_AA⁻¹ (x_A − μ_A),  Cov = Σ_BB − Σ_BA Σ_AA⁻¹ Σ_AB, with ml-matrix.
 */
function partitionConditional(mean: number[], cov: number[], x: number[], block: number[]): { mean: number[]; cov: number[][] } {
  const n = mean.length;
  const rest = [...Array(n).keys()].filter((k) => !block.includes(k));
  const S = new Matrix(Array.from({ length: n }, (_, i) => cov.slice(i * n, i * n + n)));
  const sBA = S.selection(block, rest);
  const sAA = S.selection(rest, rest);
  const sBB = S.selection(block, block);
  const dA = Matrix.columnVector(rest.map((k) => x[k] - mean[k]));
  const gain = sBA.mmul(inverse(sAA));
  const m = Matrix.columnVector(block.map((k) => mean[k])).add(gain.mmul(dA));
  const c = sBB.sub(gain.mmul(sBA.transpose()));
  return { mean: m.getColumn(0), cov: c.to2DArray() };
}

// A hand-made 3-D Gaussian (invented): strong correlation between the first two columns.
const MEAN3 = [1.0, -2.0, 0.5];
const COV3 = [2.0, 1.2, 0.3, 1.2, 1.5, -0.4, 0.3, -0.4, 0.8];

describe("conditionalColumn and conditionalPair", () => {
  it("equal the covariance-partition formulas on a 2-D Gaussian to 1e-12", () => {
    const mean = [0.3, -1.1];
    const cov = [1.7, -0.9, -0.9, 2.2];
    const seg = segmentOf(mean, cov);
    const x = [1.9, 0.4];
    for (let j = 0; j < 2; j++) {
      const got = conditionalColumn(seg, x, j);
      const want = partitionConditional(mean, cov, x, [j]);
      expect(Math.abs(got.mean - want.mean[0])).toBeLessThanOrEqual(1e-12);
      expect(Math.abs(got.sd - Math.sqrt(want.cov[0][0]))).toBeLessThanOrEqual(1e-12);
    }
  });

  it("equal the covariance-partition formulas on a 3-D Gaussian to 1e-12, for every column and every pair", () => {
    const seg = segmentOf(MEAN3, COV3);
    const x = [2.5, -0.7, -0.9];
    for (let j = 0; j < 3; j++) {
      const got = conditionalColumn(seg, x, j);
      const want = partitionConditional(MEAN3, COV3, x, [j]);
      expect(Math.abs(got.mean - want.mean[0]), `mean of column ${j}`).toBeLessThanOrEqual(1e-12);
      expect(Math.abs(got.sd - Math.sqrt(want.cov[0][0])), `sd of column ${j}`).toBeLessThanOrEqual(1e-12);
    }
    for (const [a, b] of [
      [0, 1],
      [0, 2],
      [1, 2],
    ]) {
      const got = conditionalPair(seg, x, a, b);
      const want = partitionConditional(MEAN3, COV3, x, [a, b]);
      expect(Math.abs(got.mean[0] - want.mean[0])).toBeLessThanOrEqual(1e-12);
      expect(Math.abs(got.mean[1] - want.mean[1])).toBeLessThanOrEqual(1e-12);
      expect(Math.abs(got.covariance[0] - want.cov[0][0])).toBeLessThanOrEqual(1e-12);
      expect(Math.abs(got.covariance[1] - want.cov[0][1])).toBeLessThanOrEqual(1e-12);
      expect(Math.abs(got.covariance[2] - want.cov[1][1])).toBeLessThanOrEqual(1e-12);
      const r = [x[a] - want.mean[0], x[b] - want.mean[1]];
      const cInv = inverse(new Matrix(want.cov)).to2DArray();
      const d2 = cInv[0][0] * r[0] * r[0] + 2 * cInv[0][1] * r[0] * r[1] + cInv[1][1] * r[1] * r[1];
      expect(Math.abs(got.distanceSq - d2)).toBeLessThanOrEqual(1e-12 * Math.max(1, d2));
    }
  });

  it("give the marginal mean and sd for every column of a diagonal model", () => {
    const mean = [5, -3, 0.25, 100];
    const variances = [4, 0.09, 1.5, 2500];
    const cov = new Array<number>(16).fill(0);
    variances.forEach((v, i) => (cov[i * 4 + i] = v));
    const seg = segmentOf(mean, cov);
    const x = [9, -2.5, 3, 40];
    for (let j = 0; j < 4; j++) {
      const got = conditionalColumn(seg, x, j);
      expect(got.mean).toBe(mean[j]);
      expect(Math.abs(got.sd - Math.sqrt(variances[j]))).toBeLessThanOrEqual(1e-14 * Math.sqrt(variances[j]));
    }
  });
});

describe("conditionalReasons", () => {
  const plain = ["f0", "f1", "f2"].map((name) => fitted(name, "none"));

  it("reports centre ± z₀.₉₇₅·sd and the standardized residual for untransformed features", () => {
    const seg = segmentOf(MEAN3, COV3);
    const x = [2.5, -0.7, -0.9];
    const reasons = conditionalReasons(seg, plain, x, Float64Array.from(x), 3);
    for (const reason of reasons) {
      const j = Number(reason.feature.slice(1));
      const want = partitionConditional(MEAN3, COV3, x, [j]);
      const sd = Math.sqrt(want.cov[0][0]);
      expect(reason.actual).toBe(x[j]);
      expect(Math.abs(reason.expected.center - want.mean[0])).toBeLessThanOrEqual(1e-12);
      expect(Math.abs(reason.expected.low - (want.mean[0] - Z * sd))).toBeLessThanOrEqual(1e-12);
      expect(Math.abs(reason.expected.high - (want.mean[0] + Z * sd))).toBeLessThanOrEqual(1e-12);
      expect(Math.abs(reason.standardizedResidual - (x[j] - want.mean[0]) / sd)).toBeLessThanOrEqual(1e-11);
    }
  });

  it("sorts single columns by |standardized residual| and returns the top 3 by default", () => {
    const features = ["a", "b", "c", "d", "e"].map((name) => fitted(name, "none"));
    const mean = [0, 0, 0, 0, 0];
    const cov = [1, 0.6, 0.2, 0, 0, 0.6, 1, 0.3, 0, 0, 0.2, 0.3, 1, 0.1, 0, 0, 0, 0.1, 1, 0.4, 0, 0, 0, 0.4, 1];
    const seg = segmentOf(mean, cov);
    const x = Float64Array.of(0.3, -0.2, 0.1, 0.4, 0.5);
    const all = conditionalReasons(seg, features, x, x, 5);
    const magnitudes = all.map((r) => Math.abs(r.standardizedResidual));
    expect([...magnitudes].sort((p, q) => q - p)).toEqual(magnitudes);
    expect(conditionalReasons(seg, features, x, x)).toEqual(all.slice(0, 3));
    expect(conditionalReasons(seg, features, x, x, 0)).toEqual([]);
    expect(conditionalReasons(seg, features, x, x, 50)).toHaveLength(5);
  });

  it("ranks a cyclic hour and a single column on one scale, by the tail probability of their residuals", () => {
    // Independent unit-variance columns: distance at 2.4 sd (two-sided p = 0.0164) and the hour's
    // (sin, cos) pair at √χ²₂ = 2.5 (p = e^{−6.25/2} = 0.0439). The hour's number is larger, yet the
    // distance is the rarer of the two and must come first.
    const features = [fitted("hour", "cyclic-hour"), fitted("distance", "none")];
    const seg = segmentOf([0, 0, 0], [1, 0, 0, 0, 1, 0, 0, 0, 1]);
    const x = Float64Array.of(2.5, 0, 2.4);
    const reasons = conditionalReasons(seg, features, [3, 2.4], x, 2);
    expect(reasons.map((r) => r.feature)).toEqual(["distance", "hour"]);
    expect(reasons[0].standardizedResidual).toBeCloseTo(2.4, 12);
    expect(reasons[1].standardizedResidual).toBeCloseTo(2.5, 12);
  });

  it("ranks the planted unusual feature first, even when each value alone is ordinary", () => {
    // Columns 0 and 1 are strongly correlated (ρ = 0.95); the payment has column 0 at +1.5 sd and
    // column 1 at −1.5 sd: each ordinary on its own, together very unusual. Column 2 is typical.
    const mean = [0, 0, 0];
    const cov = [1, 0.95, 0.1, 0.95, 1, 0.1, 0.1, 0.1, 1];
    const seg = segmentOf(mean, cov);
    const x = Float64Array.of(1.5, -1.5, 0.2);
    const reasons = conditionalReasons(seg, plain, x, x);
    expect(
      reasons
        .slice(0, 2)
        .map((r) => r.feature)
        .sort(),
    ).toEqual(["f0", "f1"]);
    expect(Math.abs(reasons[0].standardizedResidual)).toBeGreaterThan(8);
    expect(reasons[2].feature).toBe("f2");

    // A single planted value: f1 far from what f0 and f2 predict.
    const y = Float64Array.of(0.2, 0.2 + 6 * Math.sqrt(1 - 0.95 * 0.95), 0.1);
    expect(conditionalReasons(seg, plain, y, y)[0].feature).toBe("f1");
  });

  it("maps a log-transformed feature's range back to raw units with exp at both ends", () => {
    const features: FittedFeature[] = [fitted("amount", "log"), fitted("basket_items", "none")];
    const mean = [4.0, 2.0];
    const cov = [0.64, 0.3, 0.3, 0.5];
    const seg = segmentOf(mean, cov);
    const raw = [1240, 2];
    const x = Float64Array.of(Math.log(1240), 2);
    const reason = conditionalReasons(seg, features, raw, x).find((r) => r.feature === "amount")!;
    const want = partitionConditional(mean, cov, [...x], [0]);
    const sd = Math.sqrt(want.cov[0][0]);
    const rel = (a: number, b: number): number => Math.abs(a - b) / Math.abs(b);
    expect(rel(reason.expected.center, Math.exp(want.mean[0]))).toBeLessThanOrEqual(1e-12);
    expect(rel(reason.expected.low, Math.exp(want.mean[0] - Z * sd))).toBeLessThanOrEqual(1e-12);
    expect(rel(reason.expected.high, Math.exp(want.mean[0] + Z * sd))).toBeLessThanOrEqual(1e-12);
    expect(reason.actual).toBe(1240);
    expect(reason.expected.low).toBeLessThan(reason.expected.center);
    expect(reason.expected.high).toBeLessThan(1240);
  });

  it("clips the expected range to the raw values seen in training, so a count is never expected below zero", () => {
    // Invented: payments in the last 24 h (log1p) against hours since the previous one (log1p);
    // a long gap since the previous payment predicts so few payments that the Gaussian range,
    // mapped back with expm1, would dip below 0.
    const observed = { min: 0, max: 40 };
    const features: FittedFeature[] = [{ ...fitted("payments_24h", "log1p"), observed }, fitted("hours_since_previous", "log1p")];
    const mean = [0.2, 4.0];
    const cov = [0.25, -0.4, -0.4, 2.0];
    const seg = segmentOf(mean, cov);
    const raw = [0, 2000];
    const x = Float64Array.of(Math.log1p(0), Math.log1p(2000));
    const clipped = conditionalReasons(seg, features, raw, x, 2).find((r) => r.feature === "payments_24h")!;
    const unclipped = conditionalReasons(seg, [fitted("payments_24h", "log1p"), features[1]], raw, x, 2).find((r) => r.feature === "payments_24h")!;
    expect(unclipped.expected.low).toBeLessThan(0);
    expect(clipped.expected.low).toBe(0);
    expect(clipped.expected.high).toBe(Math.min(unclipped.expected.high, observed.max));
    expect(clipped.expected.center).toBe(Math.min(Math.max(unclipped.expected.center, 0), 40));
    expect(clipped.standardizedResidual).toBe(unclipped.standardizedResidual);
  });

  it("says the expected range lies below or above training when all of it is past one end, instead of clipping it to a point", () => {
    // Invented: the same pair; training saw between 3 and 40 payments a day (min 3), and a long gap
    // since the previous payment predicts fewer than that, so the whole range sits below the minimum.
    const features = (observed: { min: number; max: number } | undefined): FittedFeature[] => [
      { ...fitted("payments_24h", "log1p"), ...(observed ? { observed } : {}) },
      fitted("hours_since_previous", "log1p"),
    ];
    const seg = segmentOf([0.2, 4.0], [0.25, -0.4, -0.4, 2.0]);
    const raw = [0, 2000];
    const x = Float64Array.of(Math.log1p(0), Math.log1p(2000));
    const pick = (observed?: { min: number; max: number }) => conditionalReasons(seg, features(observed), raw, x, 2).find((r) => r.feature === "payments_24h")!;
    const unclipped = pick();
    expect(unclipped.expected.high).toBeLessThan(3);
    const below = pick({ min: 3, max: 40 });
    expect(below.expected).toEqual({ center: 3, low: 3, high: 3, outsideTraining: "below" });
    // And above: a training maximum just under the range's low end (invented) puts all of it above.
    expect(unclipped.expected.low).toBeGreaterThan(-1);
    const above = pick({ min: -1, max: unclipped.expected.low - 1e-6 });
    expect(above.expected.outsideTraining).toBe("above");
    // A range that overlaps the training range is clipped and carries no side.
    expect(pick({ min: 0, max: 40 }).expected.outsideTraining).toBeUndefined();
  });

  it("uses the 2×2 conditional block for a cyclic hour, with the hour of the conditional mean as centre", () => {
    // amount (log) and hour of day (sin, cos): late-night payments tend to be larger.
    const features = [fitted("amount", "log"), fitted("hour", "cyclic-hour")];
    const mean = [4.0, -0.2, 0.6];
    const cov = [0.5, -0.12, 0.05, -0.12, 0.3, 0.02, 0.05, 0.02, 0.25];
    const seg = segmentOf(mean, cov);
    const hour = 3;
    const angle = (2 * Math.PI * hour) / 24;
    const x = [Math.log(80), Math.sin(angle), Math.cos(angle)];
    // The column convention is whatever transformInto does; the reason must agree with
    // hourFromCyclic on the sin/cos columns.
    expect(hourFromCyclic(Math.sin(angle), Math.cos(angle))).toBeCloseTo(hour, 12);
    const reasons = conditionalReasons(seg, features, [80, hour], Float64Array.from(x), 2);
    const r = reasons.find((q) => q.feature === "hour")!;
    const want = partitionConditional(mean, cov, x, [1, 2]);
    const cInv = inverse(new Matrix(want.cov)).to2DArray();
    const rs = [x[1] - want.mean[0], x[2] - want.mean[1]];
    const d2 = cInv[0][0] * rs[0] ** 2 + 2 * cInv[0][1] * rs[0] * rs[1] + cInv[1][1] * rs[1] ** 2;
    expect(Math.abs(r.standardizedResidual - Math.sqrt(d2))).toBeLessThanOrEqual(1e-12);
    expect(Math.abs(r.expected.center - hourFromCyclic(want.mean[0], want.mean[1]))).toBeLessThanOrEqual(1e-10);
    expect(r.actual).toBe(hour);
  });

  it("refuses a bad top and mismatched lengths", () => {
    const seg = segmentOf(MEAN3, COV3);
    const x = Float64Array.of(0, 0, 0);
    expect(() => conditionalReasons(seg, plain, x, x, -1)).toThrow(/top must be a non-negative integer/);
    expect(() => conditionalReasons(seg, plain, x, x, 1.5)).toThrow(/top/);
    expect(() => conditionalReasons(seg, plain, [0, 0], x)).toThrow(/raw must have one value per feature \(3\)/);
    expect(() => conditionalReasons(seg, plain, x, Float64Array.of(0, 0))).toThrow(/x must have n = 3/);
    expect(() => conditionalReasons(seg, plain.slice(0, 2), [0, 0], x)).toThrow(/features produce 2 model columns/);
  });
});

describe("cyclicHourRange", () => {
  /** Circular membership of hour h in [low, high] (wrapping past midnight when low > high). */
  function inRange(h: number, low: number, high: number): boolean {
    if (low === 0 && high === 24) return true;
    return low <= high ? h >= low && h <= high : h >= low || h <= high;
  }

  it("covers about 95 % of the hours drawn from a concentrated conditional Gaussian (Monte Carlo)", () => {
    const random = createRandom(20261201);
    const normal = (): number => {
      // Box–Muller on the seeded generator.
      const u = 1 - random.next();
      return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * random.next());
    };
    for (const centerHour of [2, 11.5, 23.4]) {
      const a = (2 * Math.PI * centerHour) / 24;
      const m: [number, number] = [0.9 * Math.sin(a), 0.9 * Math.cos(a)];
      const cov: [number, number, number] = [0.012, 0.004, 0.009];
      const range = cyclicHourRange({ mean: m, covariance: cov, distanceSq: 0 });
      expect(range.center).toBeCloseTo(centerHour, 10);
      // Cholesky of the 2×2 covariance to draw correlated pairs.
      const l11 = Math.sqrt(cov[0]);
      const l21 = cov[1] / l11;
      const l22 = Math.sqrt(cov[2] - l21 * l21);
      const draws = 40_000;
      let inside = 0;
      for (let k = 0; k < draws; k++) {
        const z1 = normal();
        const z2 = normal();
        const s = m[0] + l11 * z1;
        const c = m[1] + l21 * z1 + l22 * z2;
        if (inRange(hourFromCyclic(s, c), range.low, range.high)) inside++;
      }
      // The first-order projection is accurate to about a percent at this concentration.
      expect(Math.abs(inside / draws - 0.95)).toBeLessThan(0.015);
    }
  });

  it("wraps past midnight with low > high, and gives the whole day when the angle is uncertain", () => {
    const a = (2 * Math.PI * 23.5) / 24;
    const tight = cyclicHourRange({ mean: [Math.sin(a), Math.cos(a)], covariance: [0.02, 0, 0.02], distanceSq: 0 });
    expect(tight.low).toBeGreaterThan(tight.high);
    expect(tight.low).toBeLessThan(23.5);
    expect(tight.high).toBeGreaterThan(0);
    const vague = cyclicHourRange({ mean: [0.05, 0.02], covariance: [1, 0, 1], distanceSq: 0 });
    expect([vague.low, vague.high]).toEqual([0, 24]);
    const origin = cyclicHourRange({ mean: [0, 0], covariance: [1, 0, 1], distanceSq: 0 });
    expect([origin.low, origin.high]).toEqual([0, 24]);
  });
});
