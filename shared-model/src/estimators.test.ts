import fc from "fast-check";
import { describe, expect, it } from "vitest";
import { chooseShape, classicalEstimate, FourthMomentAccumulator, ledoitWolfFromRows, shrinkageEstimate, shrinkageEstimateFromPasses, toDiagonal } from "./estimators";
import { cholesky } from "./linalg";
import { MomentAccumulator } from "./moments";
import { mulberry32 } from "./seeded-stream";
import type { EstimatorDetails } from "./types";
import { expectRelativelyClose } from "./test-support";
import { readReferenceData } from "../../test/reference-data/files";

const expected = JSON.parse(readReferenceData("expected-values.json"));

/** Numeric columns `from`..`to` (0-based after the rownames column) of a reference CSV. */
function csvRows(file: string, from: number, to: number): number[][] {
  const lines = readReferenceData(file).trim().split("\n").slice(1);
  return lines.map((line) =>
    line
      .split(",")
      .slice(1 + from, 1 + to)
      .map(Number),
  );
}

function shrinkageOf(details: EstimatorDetails): number {
  if (details.estimator !== "shrinkage") throw new Error(`expected shrinkage details, got ${details.estimator}`);
  return details.shrinkage;
}

/**
 * Ledoit–Wolf intensity straight from the paper's definitions (Ledoit & Wolf 2004, Lemma 3.2/3.3 with
 * sample quantities), without the Σ‖x̃‖⁴ shortcut: β̄² = (1/m²)·Σ_k ‖x̃_k x̃_kᵀ − S‖²_F, δ̄² = ‖S − μI‖²_F.
 */
function intensityByDefinition(rows: number[][]): number {
  const m = rows.length;
  const n = rows[0].length;
  const mean = Array.from({ length: n }, (_, j) => rows.reduce((s, r) => s + r[j], 0) / m);
  const centred = rows.map((r) => r.map((v, j) => v - mean[j]));
  const s = Array.from({ length: n }, (_, i) => Array.from({ length: n }, (_, j) => centred.reduce((t, r) => t + r[i] * r[j], 0) / m));
  const mu = s.reduce((t, row, i) => t + row[i], 0) / n;
  let dispersion = 0;
  for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) dispersion += (s[i][j] - (i === j ? mu : 0)) ** 2;
  let noise = 0;
  for (const x of centred) for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) noise += (x[i] * x[j] - s[i][j]) ** 2;
  noise /= m * m;
  const capped = Math.min(noise, dispersion);
  return capped === 0 ? 0 : capped / dispersion;
}

describe("classicalEstimate", () => {
  it("returns the mean and the covariance divided by m, with details saying so", () => {
    const acc = new MomentAccumulator(2);
    for (const row of [
      [1, 2],
      [3, 4],
      [5, 9],
    ])
      acc.push(row);
    const est = classicalEstimate(acc);
    expect(Array.from(est.mean)).toEqual([3, 5]);
    expect(Array.from(est.covariance)).toEqual([8 / 3, 14 / 3, 14 / 3, 26 / 3]);
    expect(est.rows).toBe(3);
    expect(est.n).toBe(2);
    expect(est.details).toEqual({ estimator: "classical", denominator: "m" });
    acc.push([100, 100]);
    expect(Array.from(est.mean), "the estimate does not alias the accumulator").toEqual([3, 5]);
  });

  it("matches the classical mean and covariance of the stackloss x-variables published in the SAS/IML documentation", () => {
    // Published: SAS/IML User's Guide, Robust Regression Examples, "Stackloss Data" (MVE example),
    // classical mean and covariance printed to ~11 significant digits; the covariance there divides
    // by m−1, so ours (÷m) is rescaled by m/(m−1). expected-values.json → stackloss.published.sas_iml_classical.
    const rows = csvRows("stackloss.csv", 0, 3);
    const acc = new MomentAccumulator(3);
    for (const row of rows) acc.push(row);
    const est = classicalEstimate(acc);
    const m = est.rows;
    expect(m).toBe(21);
    const published = expected.stackloss.published.sas_iml_classical;
    expectRelativelyClose(est.mean, published.mean, 1e-9, "stackloss mean vs SAS/IML");
    expectRelativelyClose(
      est.covariance.map((v) => (v * m) / (m - 1)),
      published.cov_unbiased.flat(),
      1e-9,
      "stackloss covariance vs SAS/IML",
    );
    // And to full precision against NumPy (expected-values.json → stackloss.classical, SOURCES.md §6).
    expectRelativelyClose(est.covariance, expected.stackloss.classical.cov_mle.flat(), 1e-12, "stackloss cov_mle vs NumPy");
  });

  it("refuses an empty accumulator, naming the row count", () => {
    expect(() => classicalEstimate(new MomentAccumulator(2))).toThrowError(/acc\.count: must be ≥ 1: an estimate needs at least one row/);
  });
});

describe("Ledoit–Wolf shrinkage", () => {
  it("gives scikit-learn's intensity and shrunk covariance on iris setosa", () => {
    // Reference: scikit-learn 1.2.1 `LedoitWolf().fit(X)` on iris rows 1–50
    // (expected-values.json → iris_setosa.ledoit_wolf_sklearn; SOURCES.md §6).
    const rows = csvRows("iris.csv", 0, 4).slice(0, 50);
    const est = ledoitWolfFromRows(Float64Array.from(rows.flat()), 50, 4);
    const ref = expected.iris_setosa.ledoit_wolf_sklearn;
    expectRelativelyClose([shrinkageOf(est.details)], [ref.shrinkage], 1e-12, "setosa shrinkage");
    expect(ref.shrinkage).toBe(0.09142216787593709);
    expectRelativelyClose(est.covariance, ref.covariance.flat(), 1e-12, "setosa shrunk covariance");
    expectRelativelyClose(est.mean, ref.location, 1e-12, "setosa location");
    expect(est.details).toMatchObject({ estimator: "shrinkage", denominator: "m", target: "scaled-identity" });
  });

  it("gives scikit-learn's intensity on all 150 iris rows", () => {
    // Reference: scikit-learn 1.2.1 LedoitWolf on all of iris (expected-values.json → iris_all_150).
    const rows = csvRows("iris.csv", 0, 4);
    const est = ledoitWolfFromRows(Float64Array.from(rows.flat()), 150, 4);
    expect(expected.iris_all_150.ledoit_wolf_shrinkage).toBe(0.00757880145407865);
    expectRelativelyClose([shrinkageOf(est.details)], [expected.iris_all_150.ledoit_wolf_shrinkage], 1e-12, "iris shrinkage");
  });

  it("agrees with the paper's definition of the intensity computed row by row (property)", () => {
    fc.assert(
      fc.property(fc.integer({ min: 2, max: 6 }), fc.integer({ min: 2, max: 40 }), fc.integer(), (n, m, seed) => {
        const next = mulberry32(seed).normal;
        const rows = Array.from({ length: m }, () => Array.from({ length: n }, (_, j) => (j + 1) * next() + 10 * j));
        const est = ledoitWolfFromRows(Float64Array.from(rows.flat()), m, n);
        const byDefinition = intensityByDefinition(rows);
        const got = shrinkageOf(est.details);
        expect(Math.abs(got - byDefinition), `got ${got}, definition gives ${byDefinition}`).toBeLessThanOrEqual(1e-9 * Math.max(byDefinition, 1e-3));
        expect(got).toBeGreaterThanOrEqual(0);
        expect(got).toBeLessThanOrEqual(1);
      }),
      { numRuns: 150 },
    );
  });

  it("is the same when both passes run over merged shards instead of all rows at once", () => {
    const rows = csvRows("iris.csv", 0, 4);
    const shards = [rows.slice(0, 37), rows.slice(37, 120), rows.slice(120)];
    const first = shards.map((shard) => {
      const acc = new MomentAccumulator(4);
      shard.forEach((r) => acc.push(r));
      return acc;
    });
    const pooled = first.reduce((a, b) => a.merge(b), new MomentAccumulator(4));
    const second = shards.map((shard) => {
      const acc = new FourthMomentAccumulator(pooled.mean);
      shard.forEach((r) => acc.push(r));
      return acc;
    });
    const fourth = second.reduce((a, b) => a.merge(b));
    expect(fourth.count).toBe(150);
    const streamed = shrinkageEstimateFromPasses(pooled, fourth);
    expectRelativelyClose([shrinkageOf(streamed.details)], [expected.iris_all_150.ledoit_wolf_shrinkage], 1e-12, "streamed shrinkage");
  });

  it("keeps the covariance positive definite with fewer rows than columns, where the classical one is singular", () => {
    const next = mulberry32(20261201).normal;
    const m = 6;
    const n = 10;
    const rows = Float64Array.from({ length: m * n }, () => next());
    const shrunk = ledoitWolfFromRows(rows, m, n);
    const classical = classicalEstimate(new MomentAccumulator(n).pushRows(rows, m));
    expect(cholesky(classical.covariance, n).ok).toBe(false);
    expect(cholesky(shrunk.covariance, n).ok).toBe(true);
    expect(shrinkageOf(shrunk.details)).toBeGreaterThan(0.3);
  });

  it("does not shrink a single column, whose target equals its variance", () => {
    const est = ledoitWolfFromRows(Float64Array.of(1, 2, 4, 8), 4, 1);
    expect(shrinkageOf(est.details)).toBe(0);
    expect(est.covariance[0]).toBe(new MomentAccumulator(1).pushRows(Float64Array.of(1, 2, 4, 8), 4).covariance()[0]);
  });

  it("refuses a fourth-moment sum that cannot belong to these moments, naming the argument", () => {
    const acc = new MomentAccumulator(2).pushRows(Float64Array.of(1, 2, 3, 5, 4, 4, 0, 1), 4);
    expect(() => shrinkageEstimate(acc, 0.5)).toThrowError(/sumFourthPowerOfDeviations: must be ≥ m·\(tr S\)²/);
    expect(() => shrinkageEstimate(acc, Number.NaN)).toThrowError(/sumFourthPowerOfDeviations: must be a finite number ≥ 0/);
    expect(() => shrinkageEstimate(new MomentAccumulator(2), 0)).toThrowError(/acc\.count/);
  });

  it("refuses second passes that do not match the first (row count, centre)", () => {
    const acc = new MomentAccumulator(2).pushRows(Float64Array.of(1, 2, 3, 5, 4, 4), 3);
    const short = new FourthMomentAccumulator(acc.mean);
    short.push([1, 2]);
    expect(() => shrinkageEstimateFromPasses(acc, short)).toThrowError(/fourth\.count: must equal the first pass's row count.*Expected: 3\. Actual: 1\./);
    const offCentre = new FourthMomentAccumulator(Float64Array.of(0, 0)).pushRows(Float64Array.of(1, 2, 3, 5, 4, 4), 3);
    expect(() => shrinkageEstimateFromPasses(acc, offCentre)).toThrowError(/fourth\.mean\[0\]: must be the first pass's final mean/);
    expect(() => short.merge(offCentre)).toThrowError(/o\.mean\[0\]: must equal this accumulator's centre/);
  });

  it("sums ‖x − μ‖⁴ around the given centre and refuses bad rows", () => {
    const fourth = new FourthMomentAccumulator(Float64Array.of(1, 1));
    fourth.push([2, 2]); // ‖(1,1)‖² = 2 → 4
    fourth.push([1, 4]); // ‖(0,3)‖² = 9 → 81
    expect(fourth.sum).toBe(85);
    expect(fourth.count).toBe(2);
    expect(() => fourth.push([1])).toThrowError(/^x: must have one value per column\. Expected: 2\. Actual: 1\.$/);
    expect(() => fourth.push([1, Number.NaN])).toThrowError(/x\[1\]: must be a finite number/);
    expect(fourth.sum).toBe(85);
    expect(() => new FourthMomentAccumulator(new Float64Array(0))).toThrowError(/^mean: must be a Float64Array with at least one column/);
  });
});

describe("toDiagonal", () => {
  it("keeps the variances and zeroes every covariance between columns, leaving the input untouched", () => {
    const acc = new MomentAccumulator(2);
    for (const row of [
      [1, 2],
      [3, 4],
      [5, 9],
    ])
      acc.push(row);
    const full = classicalEstimate(acc);
    const diagonal = toDiagonal(full);
    expect(Array.from(diagonal.covariance)).toEqual([8 / 3, 0, 0, 26 / 3]);
    expect(Array.from(full.covariance)).toEqual([8 / 3, 14 / 3, 14 / 3, 26 / 3]);
    expect(Array.from(diagonal.mean)).toEqual([3, 5]);
    expect(diagonal.details).toEqual(full.details);
    expect(diagonal.rows).toBe(3);
  });

  it("refuses an estimate whose covariance is not n × n", () => {
    expect(() => toDiagonal({ mean: new Float64Array(2), covariance: new Float64Array(3), n: 2, rows: 3, details: { estimator: "classical", denominator: "m" } })).toThrowError(
      /est\.covariance: must be n × n = 2 × 2\. Expected: 4\. Actual: 3\./,
    );
  });
});

describe("chooseShape", () => {
  it("chooses full under auto when there are at least 10 rows per column, saying why with the numbers", () => {
    expect(chooseShape("auto", 48000, 12)).toEqual({ shape: "full", reason: "auto chose full: 48,000 rows ≥ 10 × 12 columns" });
    expect(chooseShape("auto", 120, 12).shape).toBe("full");
  });

  it("chooses diagonal under auto below 10 rows per column, saying how many rows full would need", () => {
    expect(chooseShape("auto", 119, 12)).toEqual({
      shape: "diagonal",
      reason: "auto chose diagonal: 119 rows < 10 × 12 columns (120 rows needed for full)",
    });
    expect(chooseShape("auto", 1, 1).reason).toBe("auto chose diagonal: 1 row < 10 × 1 column (10 rows needed for full)");
  });

  it("honours an explicit request and says it was requested", () => {
    expect(chooseShape("full", 30, 12)).toEqual({ shape: "full", reason: "full as requested (--covariance full): 30 rows for 12 columns" });
    expect(chooseShape("diagonal", 1_000_000, 3)).toEqual({
      shape: "diagonal",
      reason: "diagonal as requested (--covariance diagonal): 1,000,000 rows for 3 columns",
    });
  });

  it("refuses an unknown request and impossible counts, naming the argument", () => {
    expect(() => chooseShape("spherical" as "auto", 10, 2)).toThrowError(/^request: must be "auto", "full" or "diagonal"\. Expected: .*Actual: "spherical"\.$/);
    expect(() => chooseShape("auto", -1, 2)).toThrowError(/^rows: must be an integer ≥ 0/);
    expect(() => chooseShape("auto", 10, 0)).toThrowError(/^n: must be an integer ≥ 1/);
  });
});
