import stdlibChiSquareCdf from "@stdlib/stats-base-dists-chisquare-cdf";
import fc from "fast-check";
import { describe, expect, it } from "vitest";
import { buildSegment, parseArtifact } from "./artifact";
import type { ModelArtifact } from "./artifact";
import { chiSquareSurvival, log10ChiSquareSurvival } from "./distributions";
import { fromRows } from "./linalg";
import { kernelScratch, mahalanobisSqPacked, packQuadraticForm } from "./quadratic-form";
import { ScoreInputError, Scorer, compileModel, mahalanobisSq, mahalanobisSqDiagonal, rawVectorFromRecord, selectSegment } from "./score";
import { fitted, jsonCopy, parseCsv, sealedFixture, spdCases, spdFrom } from "./test-support";
import type { FixtureOptions } from "./test-support";
import { readReferenceData } from "../../test/reference-data/files";

const LN_2PI = Math.log(2 * Math.PI);

/** Relative closeness with the numbers and their difference in the failure message. */
function expectRelClose(actual: number, expected: number, rel: number, label: string): void {
  const scale = Math.max(Math.abs(expected), Number.MIN_VALUE);
  expect(Math.abs(actual - expected) / scale, `${label}: actual ${actual}, expected ${expected}, difference ${actual - expected}`).toBeLessThanOrEqual(rel);
}

async function loaded(options: FixtureOptions): Promise<ModelArtifact> {
  return parseArtifact(jsonCopy(await sealedFixture(options)));
}

const details = { estimator: "classical", denominator: "m" } as const;

describe("scoring against iris setosa reference values (SciPy multivariate_normal)", () => {
  // Expected values: test/reference-data/expected-values.json → iris_setosa, computed with
  // scipy.stats.multivariate_normal (SciPy 1.10.1) from Fisher's iris rows 1–50 (SOURCES.md §4, §6).
  const expected = JSON.parse(readReferenceData("expected-values.json")).iris_setosa;
  const iris = parseCsv(readReferenceData("iris.csv"));
  const features = ["sepal_length", "sepal_width", "petal_length", "petal_width"].map((name) => fitted(name, "none"));
  const points: number[][] = expected.points.rows.map((row: number) => iris.rows[row - 1].slice(1, 5));

  it("reads rows 1, 42 and 44 of iris.csv as the points the reference was computed at", () => {
    expect(points).toEqual(expected.points.values);
  });

  const variants = [
    { key: "full_cov_mle", cov: expected.cov_mle, shape: "full" },
    { key: "full_cov_unbiased", cov: expected.cov_unbiased, shape: "full" },
    { key: "diagonal_cov_mle", cov: expected.cov_mle, shape: "diagonal" },
    { key: "diagonal_cov_unbiased", cov: expected.cov_unbiased, shape: "diagonal" },
  ] as const;

  for (const variant of variants) {
    it(`matches SciPy's logdet, squared distance and logpdf for ${variant.key} to 1e-10 relative`, async () => {
      const rows = variant.cov as number[][];
      const cov = rows.flatMap((row, i) => row.map((v, j) => (variant.shape === "diagonal" && i !== j ? 0 : v)));
      const artifact = await loaded({
        features,
        shape: variant.shape,
        segments: { "*": { mean: expected.mean, covariance: cov, rows: 50 } },
      });
      const model = compileModel(artifact);
      const scorer = new Scorer(model);
      const ref = expected[variant.key];
      expectRelClose(model.pooled.logDet, ref.logdet, 1e-10, `${variant.key} logdet`);
      points.forEach((p, k) => {
        const result = scorer.score(p);
        expectRelClose(result.mahalanobisSq, ref.mahalanobis_sq[k], 1e-10, `${variant.key} d² row ${expected.points.rows[k]}`);
        expectRelClose(result.logDensity, ref.logpdf[k], 1e-10, `${variant.key} logpdf row ${expected.points.rows[k]}`);
        // Outside check of the tail probability: stdlib's chi-square CDF (independent implementation).
        expectRelClose(result.tailProbability, 1 - stdlibChiSquareCdf(result.mahalanobisSq, 4), 1e-12, "tail probability");
      });
    });
  }
});

describe("scoring against R's mahalanobis() on the stackloss data (R package qqtest)", () => {
  it("reproduces qqtest's `ordinary` squared distances (covariance ÷ (m−1)) to 1e-7", () => {
    // Reference: R package qqtest (rwoldford/qqtest, data/stacklossDistances.rda), column `ordinary`
    // = mahalanobis(stack.x, colMeans, cov()) with cov() dividing by m − 1 (SOURCES.md §1).
    const data = parseCsv(readReferenceData("stackloss.csv")).rows.map((r) => r.slice(1, 4));
    const reference = parseCsv(readReferenceData("stackloss-mahalanobis-qqtest.csv")).rows;
    const m = data.length;
    const n = 3;
    const mean = new Float64Array(n);
    for (const row of data) for (let j = 0; j < n; j++) mean[j] += row[j] / m;
    const cov = new Float64Array(n * n);
    for (const row of data) {
      for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) cov[i * n + j] += ((row[i] - mean[i]) * (row[j] - mean[j])) / (m - 1);
    }
    const seg = buildSegment(mean, cov, n, m, details);
    const precision = fromRows(seg.precision);
    const diff = new Float64Array(n);
    expect(reference.length).toBe(m);
    reference.forEach(([row, ordinary]) => {
      const d2 = mahalanobisSq(precision, mean, data[row - 1], n, diff);
      expect(Math.abs(d2 - ordinary), `row ${row}: actual ${d2}, expected ${ordinary}`).toBeLessThanOrEqual(1e-7);
      // Pins the denominator: under the ÷m (maximum-likelihood) covariance, d² scales by m/(m−1).
      const mle = buildSegment(
        mean,
        cov.map((v) => (v * (m - 1)) / m),
        n,
        m,
        details,
      );
      const d2Mle = mahalanobisSq(fromRows(mle.precision), mean, data[row - 1], n, diff);
      expectRelClose(d2Mle, (ordinary * m) / (m - 1), 1e-8, `row ${row} under ÷m`);
    });
  });
});

function naiveMahalanobisSq(precision: Float64Array, mean: Float64Array, x: ArrayLike<number>, n: number): number {
  let total = 0;
  for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) total += (x[i] - mean[i]) * precision[i * n + j] * (x[j] - mean[j]);
  return total;
}

const spdCase = spdCases(10);

describe("mahalanobisSq kernel", () => {
  it("both kernels (row-major and packed) equal the naive full double loop on random positive definite precisions", () => {
    // Sizes up to 37 cover the packed kernel's groups of four and every remainder (n mod 4).
    fc.assert(
      fc.property(spdCases(37), ({ n, entries, mean, x }) => {
        const precision = spdFrom(entries, n, 0.1);
        const mu = Float64Array.from(mean);
        const want = naiveMahalanobisSq(precision, mu, x, n);
        const rowMajor = mahalanobisSq(precision, mu, x, n, new Float64Array(n));
        const packed = mahalanobisSqPacked(packQuadraticForm(precision, mu, n), Float64Array.from(x), kernelScratch(n));
        expect(Math.abs(rowMajor - want)).toBeLessThanOrEqual(1e-12 * Math.max(1, want));
        expect(Math.abs(packed - want)).toBeLessThanOrEqual(1e-12 * Math.max(1, want));
      }),
      { numRuns: 400 },
    );
  });

  it("returns the same value on each of a million calls and fills diff with x − μ", () => {
    const n = 4;
    const precision = spdFrom([0.3, -0.2, 0.5, 0.1, 0.0, 0.4, -0.3, 0.2, 0.6, 0.1, 0.2, -0.5, 0.1, 0.3, 0.0, 0.7], n, 0.2);
    const mean = Float64Array.of(1, 2, 3, 4);
    const x = Float64Array.of(1.5, 1.2, 3.3, 5.1);
    const diff = new Float64Array(n);
    const first = mahalanobisSq(precision, mean, x, n, diff);
    let mismatches = 0;
    for (let k = 0; k < 1_000_000; k++) if (mahalanobisSq(precision, mean, x, n, diff) !== first) mismatches++;
    expect(mismatches).toBe(0);
    expect(Array.from(diff)).toEqual([0.5, 1.2 - 2, 3.3 - 3, 5.1 - 4]);
    expect(first).toBeCloseTo(naiveMahalanobisSq(precision, mean, x, n), 12);
  });

  it("gives the same d² on the diagonal O(n) path as the full kernel on a diagonal precision", () => {
    fc.assert(
      fc.property(spdCase, ({ n, entries, mean, x }) => {
        const precision = new Float64Array(n * n);
        for (let i = 0; i < n; i++) precision[i * n + i] = 0.01 + Math.abs(entries[i * n + i]);
        const mu = Float64Array.from(mean);
        const full = mahalanobisSq(precision, mu, x, n, new Float64Array(n));
        const diag = mahalanobisSqDiagonal(precision, mu, x, n, new Float64Array(n));
        expect(Math.abs(full - diag)).toBeLessThanOrEqual(1e-13 * Math.max(1, full));
      }),
    );
  });

  it("is invariant under an affine change of features x → Ax + b (Σ → AΣAᵀ, μ → Aμ + b)", () => {
    const affineCase = spdCase
      .filter((c) => c.n <= 6)
      .chain((c) =>
        fc.record({
          c: fc.constant(c),
          lower: fc.array(fc.double({ min: -0.5, max: 0.5, noNaN: true }), { minLength: c.n * c.n, maxLength: c.n * c.n }),
          scale: fc.array(fc.double({ min: 0.5, max: 2, noNaN: true }), { minLength: c.n, maxLength: c.n }),
          shift: fc.array(fc.double({ min: -10, max: 10, noNaN: true }), { minLength: c.n, maxLength: c.n }),
        }),
      );
    fc.assert(
      fc.property(affineCase, ({ c, lower, scale, shift }) => {
        const { n } = c;
        const sigma = spdFrom(c.entries, n, 0.1);
        // A = L·diag(scale)·Mᵀ with L, M unit lower triangular (entries from `lower`'s two halves):
        // a full mixing of the features, invertible (det = Π scale) and reasonably conditioned.
        const unitLower = (upperHalf: boolean): Float64Array => {
          const t = new Float64Array(n * n);
          for (let i = 0; i < n; i++) {
            t[i * n + i] = 1;
            for (let j = 0; j < i; j++) t[i * n + j] = upperHalf ? lower[j * n + i] : lower[i * n + j];
          }
          return t;
        };
        const l = unitLower(false);
        const mm = unitLower(true);
        const a = new Float64Array(n * n);
        for (let i = 0; i < n; i++) {
          for (let j = 0; j < n; j++) {
            let v = 0;
            for (let k = 0; k < n; k++) v += l[i * n + k] * scale[k] * mm[j * n + k];
            a[i * n + j] = v;
          }
        }
        const mu = Float64Array.from(c.mean);
        const x = Float64Array.from(c.x);
        const ax = (v: Float64Array): Float64Array =>
          Float64Array.from({ length: n }, (_, i) => {
            let s = shift[i];
            for (let k = 0; k < n; k++) s += a[i * n + k] * v[k];
            return s;
          });
        const sigma2 = new Float64Array(n * n);
        for (let i = 0; i < n; i++) {
          for (let j = 0; j < n; j++) {
            let s = 0;
            for (let k = 0; k < n; k++) for (let l = 0; l < n; l++) s += a[i * n + k] * sigma[k * n + l] * a[j * n + l];
            sigma2[i * n + j] = s;
          }
        }
        for (let i = 0; i < n; i++) for (let j = 0; j < i; j++) sigma2[j * n + i] = sigma2[i * n + j];
        const before = buildSegment(mu, sigma, n, 100, details);
        const after = buildSegment(ax(mu), sigma2, n, 100, details);
        const d2Before = mahalanobisSq(fromRows(before.precision), mu, x, n, new Float64Array(n));
        const d2After = mahalanobisSq(fromRows(after.precision), ax(mu), ax(x), n, new Float64Array(n));
        expect(Math.abs(d2After - d2Before)).toBeLessThanOrEqual(1e-7 * Math.max(1, d2Before));
      }),
      { numRuns: 200 },
    );
  });
});

describe("Scorer", () => {
  it("gives a diagonal model's log-density as the sum of the per-feature normal log-densities", async () => {
    const diagCase = fc.integer({ min: 1, max: 6 }).chain((n) =>
      fc.record({
        n: fc.constant(n),
        mean: fc.array(fc.double({ min: -100, max: 100, noNaN: true }), { minLength: n, maxLength: n }),
        variance: fc.array(fc.double({ min: 1e-3, max: 1e3, noNaN: true }), { minLength: n, maxLength: n }),
        x: fc.array(fc.double({ min: -100, max: 100, noNaN: true }), { minLength: n, maxLength: n }),
      }),
    );
    await fc.assert(
      fc.asyncProperty(diagCase, async ({ n, mean, variance, x }) => {
        const cov = new Float64Array(n * n);
        for (let i = 0; i < n; i++) cov[i * n + i] = variance[i];
        const features = Array.from({ length: n }, (_, i) => fitted(`f${i}`, "none"));
        const model = compileModel(await loaded({ features, shape: "diagonal", segments: { "*": { mean, covariance: cov } } }));
        const result = new Scorer(model).score(x);
        let sum = 0;
        for (let i = 0; i < n; i++) sum += -0.5 * (LN_2PI + Math.log(variance[i])) - (x[i] - mean[i]) ** 2 / (2 * variance[i]);
        expect(Math.abs(result.logDensity - sum)).toBeLessThanOrEqual(1e-10 * Math.max(1, Math.abs(sum)));
      }),
      { numRuns: 60 },
    );
  });

  // Fictional shop: amount (log), basket size (log1p), hour of day (cyclic).
  const shopFeatures = [fitted("amount", "log"), fitted("basket_items", "log1p"), fitted("hour", "cyclic-hour")];
  const shopCov = [0.64, 0.3, 0.02, -0.01, 0.3, 0.25, 0.01, 0.0, 0.02, 0.01, 0.45, 0.05, -0.01, 0.0, 0.05, 0.4];
  const webCov = shopCov.map((v) => v * 1.5);
  const shop: FixtureOptions = {
    features: shopFeatures,
    segments: {
      "*": { mean: [4.0, 1.1, 0.1, -0.3], covariance: shopCov },
      web: { mean: [4.4, 1.3, -0.2, -0.1], covariance: webCov },
    },
    segmentFallbacks: { kiosk: "40 rows < 320 required" },
    cutoffMahalanobisSq: 13.28,
  };

  it("compiles each segment once with logNormalizer −½(n ln 2π + ln|Σ|) and the stored precision", async () => {
    const artifact = await loaded(shop);
    const model = compileModel(artifact);
    expect(model.n).toBe(4);
    expect([...model.segments.keys()].sort()).toEqual(["*", "web"]);
    const web = model.segments.get("web")!;
    expect(Array.from(web.precision)).toEqual(artifact.segments.web.precision.flat());
    expect(web.logNormalizer).toBe(-0.5 * (4 * LN_2PI + artifact.segments.web.logDet));
    expect(model.cutoffTailProbability).toBe(artifact.cutoff.tailProbability);
  });

  it("scores unknown, missing and fallen-back segments with the pooled model", async () => {
    const model = compileModel(await loaded(shop));
    expect(selectSegment(model, "web").key).toBe("web");
    for (const s of [null, undefined, "kiosk", "never-seen", "__proto__", "constructor"]) {
      expect(selectSegment(model, s).key).toBe("*");
    }
    const scorer = new Scorer(model);
    expect(scorer.score([60, 2, 14], "kiosk").segment).toBe("*");
    expect(scorer.score([60, 2, 14], "web").segment).toBe("web");
  });

  it("agrees on the three forms of the decision rule: d², tail probability and log-density", async () => {
    const artifact = await loaded(shop);
    const scorer = new Scorer(compileModel(artifact));
    let flaggedCount = 0;
    for (const amount of [5, 20, 60, 150, 900, 4000]) {
      for (const items of [0, 1, 3, 12]) {
        for (const hour of [0, 3.5, 12, 22]) {
          for (const segment of ["web", null]) {
            const r = scorer.score([amount, items, hour], segment);
            expect(r.flagged).toBe(r.mahalanobisSq > artifact.cutoff.mahalanobisSq);
            expect(r.flagged).toBe(r.tailProbability < artifact.cutoff.tailProbability);
            expect(r.flagged).toBe(r.logDensity < artifact.cutoff.logDensity[r.segment]);
            expect(r.tailProbability).toBe(chiSquareSurvival(r.mahalanobisSq, 4));
            expect(Math.abs(r.log10TailProbability - log10ChiSquareSurvival(r.mahalanobisSq, 4))).toBeLessThan(1e-12 * Math.max(1, -r.log10TailProbability));
            if (r.flagged) flaggedCount++;
          }
        }
      }
    }
    expect(flaggedCount).toBeGreaterThan(0);
    expect(flaggedCount).toBeLessThan(6 * 4 * 4 * 2);
  });

  it("gives a finite log10 tail probability for a payment so far out that the tail probability underflows to 0", async () => {
    const scorer = new Scorer(compileModel(await loaded(shop)));
    const far = scorer.score([1e300, 500, 3], "web");
    const farther = scorer.score([1e300, 5000, 3], "web");
    expect(far.tailProbability).toBe(0);
    expect(Number.isFinite(far.log10TailProbability)).toBe(true);
    expect(far.log10TailProbability).toBeLessThan(-323);
    // Both past the double's range, yet still ordered as their distances are.
    expect(farther.tailProbability).toBe(0);
    expect(Math.sign(farther.log10TailProbability - far.log10TailProbability)).toBe(-Math.sign(farther.mahalanobisSq - far.mahalanobisSq));
    expect(farther.mahalanobisSq).not.toBe(far.mahalanobisSq);
  });

  it("refuses a raw vector of the wrong length or with a value outside its transform's domain", async () => {
    const scorer = new Scorer(compileModel(await loaded(shop)));
    expect(() => scorer.score([60, 2])).toThrow(ScoreInputError);
    expect(() => scorer.score([60, 2])).toThrow(/features: must have 3 values in feature order. Actual: 2/);
    let caught: unknown;
    try {
      scorer.score([-5, 2, 14]);
    } catch (err) {
      caught = err;
    }
    expect(caught).toBeInstanceOf(ScoreInputError);
    expect((caught as ScoreInputError).field).toBe("features.amount");
    expect(() => scorer.score([60, Number.NaN, 14])).toThrow(/features\.basket_items: must be a finite number/);
    expect(() => scorer.score([60, 2, 30])).toThrow(/features\.hour: must be an hour of day in \[0, 24\)/);
    expect(() => scorer.score([60, -1, 14])).toThrow(/features\.basket_items: must be > -1/);
    expect(() => scorer.scoreTransformed([1, 2, 3], scorer.model.pooled)).toThrow(/must have 4 model-column values/);
  });

  it("explains a payment with the planted unusual feature first, in raw units", async () => {
    const scorer = new Scorer(compileModel(await loaded(shop)));
    // Typical basket and hour, but an amount far above what that basket predicts.
    const reasons = scorer.explain([Math.exp(4.0 + 5 * 0.8), 2, 13]);
    expect(reasons).toHaveLength(3);
    expect(reasons[0].feature).toBe("amount");
    expect(reasons[0].expected.low).toBeLessThan(reasons[0].expected.center);
    expect(reasons[0].expected.high).toBeLessThan(reasons[0].actual);
    expect(scorer.explain([60, 2, 13], "web", 1)).toHaveLength(1);
    expect(() => scorer.explain([0, 2, 13])).toThrow(/features\.amount/);
  });
});

describe("rawVectorFromRecord", () => {
  const features = [fitted("amount", "log"), fitted("basket_items", "log1p"), fitted("hour", "cyclic-hour")];
  const cov = [0.64, 0.3, 0.02, -0.01, 0.3, 0.25, 0.01, 0.0, 0.02, 0.01, 0.45, 0.05, -0.01, 0.0, 0.05, 0.4];
  const modelPromise = loaded({ features, segments: { "*": { mean: [4, 1, 0, 0], covariance: cov } } }).then(compileModel);

  it("builds the raw vector in feature order from a record keyed by feature name", async () => {
    const model = await modelPromise;
    const out = rawVectorFromRecord(model, { hour: 14.5, amount: 42.5, basket_items: 3 });
    expect(out).toEqual({ values: Float64Array.of(42.5, 3, 14.5) });
  });

  it("reports every missing, unknown, non-number, non-finite and out-of-domain field at once", async () => {
    const model = await modelPromise;
    const out = rawVectorFromRecord(model, { amount: "12", basket_items: -3, colour: "red", extra: 1 });
    expect("errors" in out).toBe(true);
    const errors = (out as { errors: { field: string; rule: string }[] }).errors;
    const fields = errors.map((e) => e.field);
    expect(fields).toEqual(["features.amount", "features.basket_items", "features.hour", "features.colour", "features.extra"]);
    expect(errors[0].rule).toMatch(/must be a number. Actual: string "12"/);
    expect(errors[1].rule.length).toBeGreaterThan(0);
    expect(errors[2].rule).toMatch(/is required/);
    expect(errors[3].rule).toMatch(/is not a feature of model m20261201-0a1b2c3d; expected only: amount, basket_items, hour/);
    const inf = rawVectorFromRecord(model, { amount: Infinity, basket_items: true, hour: null });
    expect((inf as { errors: { field: string; rule: string }[] }).errors.map((e) => e.rule)).toEqual([
      "must be a finite number. Actual: Infinity",
      "must be a number. Actual: boolean true",
      "must be a number. Actual: null",
    ]);
  });

  it("treats __proto__ and constructor keys as unknown fields and never reads inherited properties", async () => {
    const model = await modelPromise;
    const record = JSON.parse('{"amount": 10, "basket_items": 1, "hour": 3, "__proto__": {"amount": 1}}');
    const out = rawVectorFromRecord(model, record) as { errors: { field: string; rule: string }[] };
    expect(out.errors.map((e) => e.field)).toEqual(["features.__proto__"]);
    const inherited = Object.create({ amount: 10, basket_items: 1, hour: 3 }) as Record<string, unknown>;
    const missing = rawVectorFromRecord(model, inherited) as { errors: { field: string; rule: string }[] };
    expect(missing.errors.map((e) => e.field)).toEqual(["features.amount", "features.basket_items", "features.hour"]);
  });

  it("refuses a record that is not an object, and caps a flood of unknown keys", async () => {
    const model = await modelPromise;
    for (const bad of [null, [1, 2, 3], "amount=3", 7]) {
      const out = rawVectorFromRecord(model, bad as unknown as Record<string, unknown>) as { errors: { field: string; rule: string }[] };
      expect(out.errors).toHaveLength(1);
      expect(out.errors[0].field).toBe("features");
    }
    const flood: Record<string, unknown> = { amount: 10, basket_items: 1, hour: 3 };
    for (let i = 0; i < 500; i++) flood[`k${i}`] = i;
    const out = rawVectorFromRecord(model, flood) as { errors: { field: string; rule: string }[] };
    expect(out.errors).toHaveLength(21);
    expect(out.errors[20].rule).toMatch(/480 more unknown keys/);
  });
});
