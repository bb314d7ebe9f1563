import { describe, expect, it } from "vitest";
import { canonicalJson, parseArtifact, sha256Hex, type ModelArtifact } from "./artifact";
import { FitRefusal } from "./diagnostics";
import { chiSquareQuantile, chiSquareSurvival, normalQuantile } from "./distributions";
import { CUTOFF_SAMPLE_ROWS, FIT_SAMPLE_ROWS, FitInputError, defaultMinSegmentRows, fitModel, type FitOptions, type FitRow, type RowSource } from "./fit";
import { cholesky } from "./linalg";
import { MomentAccumulator } from "./moments";
import { createRandom } from "./random";
import { Scorer, compileModel } from "./score";
import { parseCsv } from "./test-support";
import type { FeatureDeclaration } from "./types";
import { readReferenceData } from "../../test/reference-data/files";

/** An in-memory row source; counts its passes so tests can check the fit restarts it. */
class ArraySource implements RowSource {
  passes = 0;
  constructor(private readonly rows: readonly FitRow[]) {}
  async *pass(): AsyncGenerator<FitRow> {
    this.passes++;
    for (const row of this.rows) yield row;
  }
}

const plain = (...names: string[]): FeatureDeclaration[] => names.map((name) => ({ name, transform: "none" }));

function options(features: FeatureDeclaration[], extra: Partial<FitOptions> = {}): FitOptions {
  return {
    features,
    shape: "auto",
    estimator: "classical",
    segmentBy: null,
    cutoffRate: 0.01,
    createdAt: "2026-03-02T08:00:00Z",
    ...extra,
  };
}

/** m draws of N(μ, Σ) by x = μ + L·z with z from the Box–Muller transform (seeded). */
function gaussianRows(m: number, mean: number[], covariance: number[], seed: number): number[][] {
  const n = mean.length;
  const chol = cholesky(Float64Array.from(covariance), n);
  const random = createRandom(seed);
  const rows: number[][] = [];
  const z = new Float64Array(n);
  for (let r = 0; r < m; r++) {
    for (let i = 0; i < n; i++) {
      const u1 = 1 - random.next();
      const u2 = random.next();
      z[i] = Math.sqrt(-2 * Math.log(u1)) * Math.cos(2 * Math.PI * u2);
    }
    const x: number[] = [];
    for (let i = 0; i < n; i++) {
      let v = mean[i];
      for (let k = 0; k <= i; k++) v += chol.lower[i * n + k] * z[k];
      x.push(v);
    }
    rows.push(x);
  }
  return rows;
}

const asRows = (values: number[][], segment: (i: number) => string | null = () => null): FitRow[] => values.map((v, i) => ({ values: Float64Array.from(v), segment: segment(i) }));

async function refusal(run: Promise<unknown>): Promise<FitRefusal> {
  try {
    await run;
  } catch (error) {
    if (error instanceof FitRefusal) return error;
    throw error;
  }
  throw new Error("expected a FitRefusal");
}

async function inputError(run: Promise<unknown>): Promise<FitInputError> {
  try {
    await run;
  } catch (error) {
    if (error instanceof FitInputError) return error;
    throw error;
  }
  throw new Error("expected a FitInputError");
}

const MEAN = [100, 5, -2];
const COV = [400, 12, -6, 12, 4, 0.5, -6, 0.5, 1];

describe("fitting a generated Gaussian", () => {
  const data = gaussianRows(20_000, MEAN, COV, 11);

  it("recovers μ and Σ within their sampling error", async () => {
    const { artifact } = await fitModel(new ArraySource(asRows(data)), options(plain("amount", "items", "share")));
    const seg = artifact.segments["*"];
    const m = data.length;
    for (let i = 0; i < 3; i++) {
      // Four standard errors of a mean: sd/√m.
      expect(Math.abs(seg.mean[i] - MEAN[i])).toBeLessThan(4 * Math.sqrt(COV[i * 3 + i] / m));
      for (let j = 0; j < 3; j++) {
        // Standard error of a sample covariance ≈ √((σ_ii σ_jj + σ_ij²)/m) for Gaussian data.
        const se = Math.sqrt((COV[i * 3 + i] * COV[j * 3 + j] + COV[i * 3 + j] ** 2) / m);
        expect(Math.abs(seg.covariance[i][j] - COV[i * 3 + j]), `Σ[${i}][${j}]`).toBeLessThan(4 * se);
      }
    }
    expect(artifact.covarianceShape).toBe("full");
    expect(artifact.estimator).toBe("classical");
    expect(seg.details).toEqual({ estimator: "classical", denominator: "m" });
  });

  it("uses every row and divides by m, to rounding, as a direct two-pass computation does", async () => {
    const { artifact } = await fitModel(new ArraySource(asRows(data)), options(plain("a", "b", "c")));
    const m = data.length;
    const mean = [0, 1, 2].map((j) => data.reduce((s, r) => s + r[j], 0) / m);
    const seg = artifact.segments["*"];
    for (let i = 0; i < 3; i++) {
      expect(seg.mean[i]).toBeCloseTo(mean[i], 9);
      for (let j = 0; j < 3; j++) {
        const cov = data.reduce((s, r) => s + (r[i] - mean[i]) * (r[j] - mean[j]), 0) / m;
        expect(Math.abs(seg.covariance[i][j] - cov) / Math.abs(cov)).toBeLessThan(1e-10);
      }
    }
    expect(artifact.training).toEqual({ rowsRead: m, rowsUsed: m, rowsExcludedAsFraud: 0, source: null });
  });

  it("flags the requested share of deleted distances, a little less of the training rows themselves, by every form of the decision rule", async () => {
    const rows = data.slice(0, 5_000);
    const { artifact } = await fitModel(new ArraySource(asRows(rows)), options(plain("a", "b", "c"), { cutoffRate: 0.02 }));
    const scorer = new Scorer(compileModel(artifact));
    let flagged = 0;
    let byTail = 0;
    let byDensity = 0;
    for (const row of rows) {
      const result = scorer.score(row);
      if (result.flagged) flagged++;
      if (result.tailProbability < artifact.cutoff.tailProbability) byTail++;
      if (result.logDensity < artifact.cutoff.logDensity["*"]) byDensity++;
    }
    // 100 rows in the tail: the cutoff is the quantile of the deleted distances (each row against
    // the fit without it), so the expected rate for new payments is within one row of the request
    // and the training rows themselves, measured against a fit they shaped, are flagged a bit less.
    expect(Math.abs(artifact.cutoff.flagRate! - 0.02)).toBeLessThanOrEqual(1 / rows.length);
    expect(flagged / rows.length).toBeLessThanOrEqual(0.02);
    expect(flagged / rows.length).toBeGreaterThan(0.015);
    expect(byTail).toBe(flagged);
    expect(byDensity).toBe(flagged);
    expect(artifact.cutoff.basis).toBe("flag-rate");
    // Under the model d² ~ χ²₃, so the 2 % cutoff sits near the χ²₃ 0.98 quantile (tail ≈ 0.02).
    expect(artifact.cutoff.tailProbability).toBeGreaterThan(0.012);
    expect(artifact.cutoff.tailProbability).toBeLessThan(0.03);
    expect(artifact.cutoff.tailProbability).toBe(chiSquareSurvival(artifact.cutoff.mahalanobisSq, 3));
  });

  it("stores decile edges of every model column and of d² from the training rows", async () => {
    const rows = data.slice(0, 999);
    const { artifact } = await fitModel(new ArraySource(asRows(rows)), options(plain("a", "b", "c")));
    expect(artifact.reference.columnEdges).toHaveLength(3);
    const sorted = rows.map((r) => r[1]).sort((x, y) => x - y);
    // Type-7 quantiles: with 999 rows, decile p sits exactly on sorted[998·p].
    for (let d = 1; d <= 9; d++) {
      const h = 998 * (d / 10);
      const lo = Math.floor(h);
      const expected = sorted[lo] + (h - lo) * (sorted[Math.min(lo + 1, 998)] - sorted[lo]);
      expect(artifact.reference.columnEdges[1][d - 1]).toBeCloseTo(expected, 10);
    }
    const scorer = new Scorer(compileModel(artifact));
    const d2 = rows.map((r) => scorer.score(r).mahalanobisSq).sort((x, y) => x - y);
    expect(artifact.reference.scoreEdges).toHaveLength(9);
    const median = d2[499];
    expect(artifact.reference.scoreEdges[4]).toBeCloseTo(median, 9);
  });

  it("restarts the source for each pass: four passes for shrinkage, three otherwise", async () => {
    const classical = new ArraySource(asRows(data.slice(0, 500)));
    await fitModel(classical, options(plain("a", "b", "c")));
    expect(classical.passes).toBe(3);
    const shrinkage = new ArraySource(asRows(data.slice(0, 500)));
    await fitModel(shrinkage, options(plain("a", "b", "c"), { estimator: "shrinkage" }));
    expect(shrinkage.passes).toBe(4);
  });

  it("reads the training counts after the last pass, so a streaming source can supply them", async () => {
    const source = new ArraySource(asRows(data.slice(0, 400)));
    let excluded = 0;
    const { artifact } = await fitModel(source, {
      ...options(plain("a", "b", "c")),
      source: "ledger-2026-02.csv",
      get rowsRead() {
        return 400 + excluded;
      },
      get rowsExcludedAsFraud() {
        return excluded;
      },
      onProgress: () => {
        excluded = 7;
      },
    });
    expect(artifact.training).toEqual({ rowsRead: 407, rowsUsed: 400, rowsExcludedAsFraud: 7, source: "ledger-2026-02.csv" });
  });
});

describe("the model id", () => {
  const rows = asRows(gaussianRows(300, MEAN, COV, 5));

  it("is m + the UTC date + the first 8 hex of the SHA-256 of the content without version and checksum", async () => {
    const { artifact } = await fitModel(new ArraySource(rows), options(plain("a", "b", "c")));
    expect(artifact.version).toMatch(/^m20260302-[0-9a-f]{8}$/);
    const { version: _version, checksum: _checksum, ...content } = artifact;
    const hash = await sha256Hex(canonicalJson(content));
    expect(artifact.version).toBe(`m20260302-${hash.slice(0, 8)}`);
  });

  it("is the same for the same rows and options, and differs when a row changes", async () => {
    const a = await fitModel(new ArraySource(rows), options(plain("a", "b", "c")));
    const b = await fitModel(new ArraySource(rows), options(plain("a", "b", "c")));
    expect(b.artifact.version).toBe(a.artifact.version);
    expect(b.artifact.checksum).toBe(a.artifact.checksum);
    const changed = rows.map((r, i) => (i === 17 ? { ...r, values: Float64Array.from(r.values, (v) => v + 1) } : r));
    const c = await fitModel(new ArraySource(changed), options(plain("a", "b", "c")));
    expect(c.artifact.version).not.toBe(a.artifact.version);
  });

  it("is the caller's when given", async () => {
    const { artifact } = await fitModel(new ArraySource(rows), options(plain("a", "b", "c"), { version: "m-weekly-7" }));
    expect(artifact.version).toBe("m-weekly-7");
    await expect(parseArtifact(JSON.parse(JSON.stringify(artifact)))).resolves.toBeTruthy();
  });
});

describe("segments", () => {
  // Fictional channels: web and app with their own centres, kiosk with only 40 rows.
  const web = gaussianRows(900, [50, 2], [25, 3, 3, 1], 21);
  const app = gaussianRows(700, [20, 1], [9, 1, 1, 0.5], 22);
  const kiosk = gaussianRows(40, [200, 8], [100, 2, 2, 1], 23);
  const rows: FitRow[] = [
    ...asRows(web, () => "web"),
    ...asRows(app, () => "app"),
    ...asRows(kiosk, () => "kiosk"),
    ...asRows(gaussianRows(30, [40, 2], [20, 1, 1, 1], 24), () => null),
  ];

  it("fits one model per value with enough rows and sends small values to the pooled model with the reason", async () => {
    const { artifact, report } = await fitModel(new ArraySource(rows), options(plain("amount", "items"), { segmentBy: "channel" }));
    expect(artifact.segmentBy).toBe("channel");
    expect(artifact.minSegmentRows).toBe(defaultMinSegmentRows(2));
    expect(defaultMinSegmentRows(2)).toBe(200);
    expect(defaultMinSegmentRows(30)).toBe(300);
    expect(Object.keys(artifact.segments).sort()).toEqual(["*", "app", "web"]);
    expect(artifact.segmentFallbacks).toEqual({ kiosk: "40 rows < 200 required" });
    expect(artifact.segments.web.rows).toBe(900);
    expect(artifact.segments["*"].rows).toBe(rows.length);
    const webMean = [0, 1].map((j) => web.reduce((s, r) => s + r[j], 0) / web.length);
    expect(artifact.segments.web.mean[0]).toBeCloseTo(webMean[0], 9);
    expect(artifact.segments.web.mean[1]).toBeCloseTo(webMean[1], 9);
    expect(Object.keys(artifact.cutoff.logDensity).sort()).toEqual(["*", "app", "web"]);
    expect(report.segments).toEqual([
      { key: "*", rows: rows.length },
      { key: "app", rows: 700 },
      { key: "web", rows: 900 },
      { key: "kiosk", rows: 40, fallback: "40 rows < 200 required" },
    ]);
    expect(report.lines.join("\n")).toContain("kiosk: 40 rows → pooled model (40 rows < 200 required)");
    const model = compileModel(await parseArtifact(JSON.parse(JSON.stringify(artifact))));
    const scorer = new Scorer(model);
    expect(scorer.score(kiosk[0], "kiosk").segment).toBe("*");
    expect(scorer.score(web[0], "web").segment).toBe("web");
  });

  it("scores each training row under its own segment when placing the cutoff", async () => {
    const { artifact } = await fitModel(new ArraySource(rows), options(plain("amount", "items"), { segmentBy: "channel", cutoffRate: 0.05 }));
    const scorer = new Scorer(compileModel(artifact));
    const flagged = rows.filter((r) => scorer.score(r.values, r.segment).flagged).length;
    // In-sample distances are optimistic, so the training rows flag at or a little below the rate
    // asked for new payments.
    expect(flagged / rows.length).toBeLessThanOrEqual(0.05 + 1 / rows.length);
    expect(flagged / rows.length).toBeGreaterThan(0.03);
  });

  it("honours --min-segment-rows and ignores the segment values when segmentBy is null", async () => {
    const low = await fitModel(new ArraySource(rows), options(plain("amount", "items"), { segmentBy: "channel", minSegmentRows: 30 }));
    expect(Object.keys(low.artifact.segments).sort()).toEqual(["*", "app", "kiosk", "web"]);
    const none = await fitModel(new ArraySource(rows), options(plain("amount", "items")));
    expect(Object.keys(none.artifact.segments)).toEqual(["*"]);
    expect(none.artifact.segmentFallbacks).toEqual({});
  });

  it("sends a segment whose own fit fails a diagnostic to the pooled model, with a warning", async () => {
    // In segment 'flat' every payment has 2 items: a constant column inside that segment only.
    const flat = gaussianRows(300, [30, 2], [16, 0, 0, 1], 25).map((r) => [r[0], 2]);
    const { artifact, report } = await fitModel(new ArraySource([...rows, ...asRows(flat, () => "flat")]), options(plain("amount", "items"), { segmentBy: "channel" }));
    expect(artifact.segments.flat).toBeUndefined();
    expect(artifact.segmentFallbacks.flat).toContain("items");
    expect(artifact.diagnostics.some((d) => d.code === "segment-fallback" && d.message.includes("'flat'"))).toBe(true);
    expect(report.lines.some((l) => l.startsWith("warning:") && l.includes("flat"))).toBe(true);
  });

  it("refuses '*' as a segment value, naming the row", async () => {
    const error = await inputError(
      fitModel(
        new ArraySource(
          asRows(
            [
              [1, 2],
              [2, 3],
            ],
            () => "*",
          ),
        ),
        options(plain("a", "b"), { segmentBy: "channel" }),
      ),
    );
    expect(error.row).toBe(1);
    expect(error.message).toContain("'*' is reserved for the pooled model");
  });
});

describe("refusals", () => {
  it("refuses a full covariance with too few rows and says how many are needed", async () => {
    const error = await refusal(
      fitModel(
        new ArraySource(
          asRows([
            [1, 2, 3, 4],
            [2, 1, 4, 3],
            [3, 5, 1, 2],
          ]),
        ),
        options(plain("a", "b", "c", "d"), { shape: "full" }),
      ),
    );
    const tooFew = error.diagnostics.find((d) => d.code === "too-few-rows");
    expect(tooFew?.severity).toBe("error");
    expect(tooFew?.message).toContain("3 rows for 4 columns");
    expect(tooFew?.remedy).toContain("--covariance diagonal");
  });

  it("refuses an empty source", async () => {
    const error = await refusal(fitModel(new ArraySource([]), options(plain("a"))));
    expect(error.diagnostics[0].code).toBe("too-few-rows");
  });

  it("names a planted linear dependency with its equation, and shrinkage fits the same rows", async () => {
    // Fictional checkout: total = subtotal + shipping exactly.
    const base = gaussianRows(2_000, [60, 6], [400, 10, 10, 4], 31);
    const data = base.map(([subtotal, shipping]) => [subtotal, shipping, subtotal + shipping]);
    const features = plain("subtotal", "shipping", "total");
    const error = await refusal(fitModel(new ArraySource(asRows(data)), options(features)));
    const dependency = error.diagnostics.find((d) => d.code === "linear-dependency");
    expect(dependency?.severity).toBe("error");
    expect(dependency?.equation).toBe("total ≈ 1.00·subtotal + 1.00·shipping");
    expect(dependency?.remedy).toContain("--estimator shrinkage");
    const { artifact } = await fitModel(new ArraySource(asRows(data)), options(features, { estimator: "shrinkage" }));
    const details = artifact.segments["*"].details;
    expect(details.estimator).toBe("shrinkage");
    if (details.estimator === "shrinkage") expect(details.shrinkage).toBeGreaterThan(0);
    await expect(parseArtifact(JSON.parse(JSON.stringify(artifact)))).resolves.toBeTruthy();
  });

  it("names the column behind a robust exact fit: a count that is zero in most rows", async () => {
    // Fictional velocity count: 0 in 80 % of payments, so more than h rows share one value.
    const data = gaussianRows(1_000, [3, 0], [1, 0.2, 0.2, 1], 42).map(([a, b], i) => [a, b, i % 5 === 0 ? 1 + (i % 3) : 0]);
    const error = await refusal(fitModel(new ArraySource(asRows(data)), options(plain("amount", "age", "payments_24h"), { estimator: "robust" })));
    const exact = error.diagnostics.find((d) => d.code === "robust-exact-fit");
    expect(exact?.severity).toBe("error");
    expect(exact?.equation).toBe("payments_24h = 0");
    expect(exact?.columns).toEqual(["payments_24h"]);
    expect(exact?.message).toBe(
      "800 of 1,000 rows satisfy payments_24h = 0 exactly (in model units), more than the 502 rows the robust fit keeps, so its covariance would be singular",
    );
    expect(exact?.remedy).toContain("--estimator shrinkage");
    expect(exact?.remedy).toContain("raise --support-fraction above 0.80");
  });

  it("fits that zero-inflated count robustly once the support fraction keeps more rows than share one value", async () => {
    const data = gaussianRows(1_000, [3, 0], [1, 0.2, 0.2, 1], 42).map(([a, b], i) => [a, b, i % 5 === 0 ? 1 + (i % 3) : 0]);
    const { artifact } = await fitModel(new ArraySource(asRows(data)), options(plain("amount", "age", "payments_24h"), { estimator: "robust", supportFraction: 0.9 }));
    const details = artifact.segments["*"].details;
    expect(details.estimator).toBe("robust");
    // h = max(⌊(1000+3+1)/2⌋, ⌈0.9·1000⌉) = 900 > the 800 rows with payments_24h = 0.
    expect(details.estimator === "robust" && details.h).toBe(900);
    await expect(parseArtifact(JSON.parse(JSON.stringify(artifact)))).resolves.toBeTruthy();
  });

  it("refuses a support fraction outside [0.5, 1] or with another estimator, naming the option", async () => {
    const rows = asRows(gaussianRows(200, [0, 0], [1, 0, 0, 1], 43));
    const low = await inputError(fitModel(new ArraySource(rows), options(plain("a", "b"), { estimator: "robust", supportFraction: 0.3 })));
    expect(low.field).toBe("supportFraction");
    expect(low.message).toContain("must be between 0.5 and 1; got 0.3");
    const classical = await inputError(fitModel(new ArraySource(rows), options(plain("a", "b"), { supportFraction: 0.8 })));
    expect(classical.message).toContain("applies to the robust estimator only");
  });

  it("refuses a column that is constant in all rows, naming it", async () => {
    const data = gaussianRows(500, [10, 3], [4, 1, 1, 2], 41).map((r) => [r[0], r[1], 1]);
    const error = await refusal(fitModel(new ArraySource(asRows(data)), options(plain("a", "b", "currency"))));
    const constant = error.diagnostics.find((d) => d.code === "constant-column");
    expect(constant?.columns).toEqual(["currency"]);
  });
});

describe("bad input", () => {
  const rows = asRows(gaussianRows(300, [3, 1], [1, 0.2, 0.2, 1], 51).map(([a, b]) => [Math.exp(a), b]));

  it("names the feature, the rule and the row of a value outside its transform's domain", async () => {
    const bad = [...rows.slice(0, 9), { values: Float64Array.of(-3, 1), segment: null }, ...rows.slice(9)];
    const error = await inputError(
      fitModel(
        new ArraySource(bad),
        options([
          { name: "amount", transform: "log" },
          { name: "items", transform: "none" },
        ]),
      ),
    );
    expect(error.field).toBe("amount");
    expect(error.row).toBe(10);
    expect(error.message).toBe("row 10, amount: must be > 0 for the log transform; got -3");
  });

  it("refuses a row with the wrong number of values", async () => {
    const error = await inputError(fitModel(new ArraySource([{ values: Float64Array.of(1), segment: null }]), options(plain("a", "b"))));
    expect(error.message).toBe("row 1, values: must hold one raw value per feature (2); got 1");
  });

  it("refuses a source whose passes do not yield the same rows", async () => {
    let pass = 0;
    const shrinking: RowSource = {
      async *pass() {
        pass++;
        const count = pass === 1 ? rows.length : rows.length - 1;
        for (const row of rows.slice(0, count)) yield row;
      },
    };
    const error = await inputError(fitModel(shrinking, options(plain("a", "b"))));
    expect(error.field).toBe("source");
    expect(error.message).toContain("every pass must restart from the first row");
  });

  it("names each bad option and its rule", async () => {
    const source = new ArraySource(rows);
    const cases: [Partial<FitOptions>, string][] = [
      [{ cutoffRate: 1 }, "cutoffRate: must be a number with 0 < rate < 1; got 1"],
      [{ cutoffRate: 0 }, "cutoffRate: must be a number with 0 < rate < 1; got 0"],
      [{ seed: -1 }, "seed: must be a whole number ≥ 0; got -1"],
      [{ minSegmentRows: 0 }, "minSegmentRows: must be a whole number ≥ 1; got 0"],
      [{ features: [] }, "features: must list at least one feature"],
      [{ features: plain("a", "a") }, "features: 'a' is listed twice; list each feature once"],
      [{ createdAt: "yesterday" }, "createdAt: must be an ISO-8601 date-time such as 2026-12-01T09:30:00Z; got 'yesterday'"],
      [{ rowsRead: 10 }, "rowsRead: must be a whole number ≥ rows used + rows excluded as fraud (300); got 10"],
      [{ rowsExcludedAsFraud: -2 }, "rowsExcludedAsFraud: must be a whole number ≥ 0; got -2"],
    ];
    for (const [extra, message] of cases) {
      const error = await inputError(fitModel(source, options(plain("a", "b"), extra)));
      expect(error.message).toBe(message);
    }
  });
});

describe("estimators and transforms end to end", () => {
  it("fits Yeo–Johnson λ from the rows and stores it with the feature", async () => {
    // Right-skewed fictional amounts: exp of a normal.
    const data = gaussianRows(3_000, [3, 0], [0.5, 0, 0, 1], 61).map(([a, b]) => [Math.exp(a), b]);
    const { artifact } = await fitModel(
      new ArraySource(asRows(data)),
      options([
        { name: "amount", transform: "yeo-johnson" },
        { name: "z", transform: "none" },
      ]),
    );
    const lambda = artifact.features[0].lambda;
    expect(lambda).toBeDefined();
    // A log-normal needs a strongly concave power (λ well below 1) to look Gaussian.
    expect(lambda!).toBeLessThan(0.5);
    expect(artifact.features[0].columns).toEqual(["amount"]);
  });

  it("warns, naming the feature and a remedy, when a Yeo–Johnson power ends on the end of its range", async () => {
    // Invented: a share that is 0 for nine payments in ten and small otherwise (a spike and a thin
    // tail), which no power makes Gaussian; beside it an ordinary right-skewed amount.
    const data = gaussianRows(3_000, [3, 0], [0.5, 0, 0, 1], 62).map(([a, b], i) => [Math.exp(a), i % 10 === 0 ? 0.05 + 0.02 * Math.abs(b) : 0]);
    const { artifact } = await fitModel(
      new ArraySource(asRows(data)),
      options([
        { name: "amount", transform: "yeo-johnson" },
        { name: "share", transform: "yeo-johnson" },
      ]),
    );
    expect(artifact.features[1].lambda).toBe(-5);
    const warnings = artifact.diagnostics.filter((d) => d.code === "power-at-bound");
    expect(warnings).toEqual([
      {
        code: "power-at-bound",
        severity: "warning",
        message:
          "the Yeo–Johnson power of share reached the end of its range (λ = -5, range -5 to 5): no power transform makes it " +
          "look Gaussian, so its part of the score and its expected ranges are less reliable",
        columns: ["share"],
        remedy: "declare another transform for share in the spec (none or log1p), or split it into an indicator and an amount",
      },
    ]);
  });

  it("builds a valid robust artifact that ignores a planted cluster the classical fit is pulled by", async () => {
    const clean = gaussianRows(900, [0, 0, 0], [1, 0.3, 0, 0.3, 1, 0.2, 0, 0.2, 1], 71);
    const ring = gaussianRows(100, [6, -6, 6], [0.05, 0, 0, 0, 0.05, 0, 0, 0, 0.05], 72);
    const source = new ArraySource(asRows([...clean, ...ring]));
    const robust = await fitModel(source, options(plain("a", "b", "c"), { estimator: "robust", seed: 3 }));
    const classical = await fitModel(source, options(plain("a", "b", "c")));
    await expect(parseArtifact(JSON.parse(JSON.stringify(robust.artifact)))).resolves.toBeTruthy();
    const details = robust.artifact.segments["*"].details;
    expect(details.estimator).toBe("robust");
    if (details.estimator === "robust") {
      expect(details.seed).toBe(3);
      expect(details.h).toBe(Math.floor((1000 + 3 + 1) / 2));
      expect(details.reweightedRows).toBeLessThan(1000);
      expect(details.reweightedRows).toBeGreaterThan(800);
    }
    const norm = (v: number[]): number => Math.hypot(...v);
    expect(norm(robust.artifact.segments["*"].mean)).toBeLessThan(0.2);
    expect(norm(classical.artifact.segments["*"].mean)).toBeGreaterThan(0.8);
    expect(robust.report.lines.join("\n")).toMatch(/robust \(FAST-MCD, seed 3\): h = 502 of 1,000 rows, \d+ rows kept after reweighting/);
    // Masking: under the classical fit, inflated by the cluster, its rows look ordinary; under the
    // robust fit every one of them lies beyond the χ²₃ 0.999 quantile.
    const nearestRing = (artifact: ModelArtifact): number => {
      const scorer = new Scorer(compileModel(artifact));
      return Math.min(...ring.map((r) => scorer.score(r).mahalanobisSq));
    };
    const extreme = chiSquareQuantile(0.999, 3);
    expect(nearestRing(robust.artifact)).toBeGreaterThan(extreme);
    expect(nearestRing(classical.artifact)).toBeLessThan(extreme);
  });

  it("writes a report with rows, shape and why, estimator, conditioning and the cutoff", async () => {
    const data = gaussianRows(200, MEAN, COV, 81);
    const { report } = await fitModel(
      new ArraySource(asRows(data)),
      options(plain("a", "b", "c"), { shape: "diagonal", estimator: "shrinkage", rowsRead: 210, rowsExcludedAsFraud: 10, source: "week-09.csv" }),
    );
    const text = report.lines.join("\n");
    expect(text).toContain("rows: 210 read from week-09.csv, 200 used, 10 excluded as labelled fraud");
    expect(text).toContain("covariance: diagonal (diagonal as requested");
    expect(text).toMatch(/estimator: shrinkage \(Ledoit–Wolf toward \(tr S\/n\)·I, divides by m\), pooled δ = /);
    expect(text).toContain("condition number of the pooled covariance:");
    expect(text).toMatch(
      /cutoff: flag when d² > [\d.]+ \(tail probability P\(χ²3 > d²\) < [\d.e-]+\); expected to flag [\d.]+ % of new payments \(asked 1\.00 %\); chosen by the /,
    );
    expect(report.shape).toBe("diagonal");
    expect(report.rowsUsed).toBe(200);
    expect(report.conditionNumber).toBeGreaterThan(1);
  });

  it("samples when the rows outnumber the reservoirs, and still flags the requested share", async () => {
    // 250,000 standard normal rows: more than both the λ/edge sample and the d² sample hold.
    const m = 250_000;
    expect(m).toBeGreaterThan(FIT_SAMPLE_ROWS);
    expect(m).toBeGreaterThan(CUTOFF_SAMPLE_ROWS);
    const random = createRandom(99);
    const rows: FitRow[] = [];
    for (let i = 0; i < m; i++) {
      const z = Math.sqrt(-2 * Math.log(1 - random.next())) * Math.cos(2 * Math.PI * random.next());
      rows.push({ values: Float64Array.of(z), segment: null });
    }
    const fit = (seed: number) => fitModel(new ArraySource(rows), options(plain("z"), { seed }));
    const { artifact } = await fit(4);
    const flagged = rows.filter((r) => {
      const d = r.values[0] - artifact.segments["*"].mean[0];
      return (d * d) / artifact.segments["*"].covariance[0][0] > artifact.cutoff.mahalanobisSq;
    }).length;
    // The sampled 0.99 quantile has a standard error of about √(0.01·0.99/200,000) ≈ 0.00022.
    expect(Math.abs(flagged / m - 0.01)).toBeLessThan(0.0012);
    // Deciles of a standard normal from the 100,000-row sample: within a few standard errors.
    artifact.reference.columnEdges[0].forEach((edge, k) => {
      expect(Math.abs(edge - normalQuantile((k + 1) / 10)), `decile ${k + 1}`).toBeLessThan(0.02);
    });
    const again = await fit(4);
    expect(again.artifact.cutoff.mahalanobisSq).toBe(artifact.cutoff.mahalanobisSq);
    const other = await fit(5);
    expect(other.artifact.cutoff.mahalanobisSq).not.toBe(artifact.cutoff.mahalanobisSq);
  });
});

describe("outside references", () => {
  // Fisher's iris, setosa rows 1–50 (reference-data/iris.csv; SOURCES.md §4). Expected mean and
  // maximum-likelihood covariance from expected-values.json → iris_setosa (NumPy `np.cov(bias=True)`,
  // SOURCES.md §6); Ledoit–Wolf intensity from scikit-learn 1.2.1 `LedoitWolf().fit(X).shrinkage_`.
  const expected = JSON.parse(readReferenceData("expected-values.json"));
  const iris = parseCsv(readReferenceData("iris.csv"));
  const setosa = iris.rows.slice(0, 50).map((r) => r.slice(1, 5));
  const features = plain("sepal_length", "sepal_width", "petal_length", "petal_width");

  it("fits iris setosa to NumPy's mean and maximum-likelihood covariance", async () => {
    const { artifact } = await fitModel(new ArraySource(asRows(setosa)), options(features));
    const seg = artifact.segments["*"];
    expect(artifact.covarianceShape).toBe("full");
    for (let i = 0; i < 4; i++) {
      expect(Math.abs(seg.mean[i] - expected.iris_setosa.mean[i])).toBeLessThan(1e-12);
      for (let j = 0; j < 4; j++) {
        const want = expected.iris_setosa.cov_mle[i][j];
        expect(Math.abs(seg.covariance[i][j] - want) / Math.abs(want), `Σ[${i}][${j}]`).toBeLessThan(1e-10);
      }
    }
    expect(Math.abs(seg.logDet - expected.iris_setosa.full_cov_mle.logdet)).toBeLessThan(1e-9);
  });

  it("fits iris setosa with shrinkage to scikit-learn's Ledoit–Wolf intensity", async () => {
    const { artifact } = await fitModel(new ArraySource(asRows(setosa)), options(features, { estimator: "shrinkage" }));
    const details = artifact.segments["*"].details;
    expect(details.estimator).toBe("shrinkage");
    if (details.estimator === "shrinkage") {
      expect(Math.abs(details.shrinkage - expected.iris_setosa.ledoit_wolf_sklearn.shrinkage)).toBeLessThan(1e-10);
    }
  });

  it("ranks the published HBK outliers 1–14 as the 14 most distant rows under the robust fit", async () => {
    // Hawkins, Bradu & Kass (1984), Technometrics 26:197–208; robustbase man/hbk.Rd: "The first 14
    // observations are outliers … can be easily unmasked using robust distances computed by, e.g., MCD".
    const hbk = parseCsv(readReferenceData("hbk.csv")).rows.map((r) => r.slice(1, 4));
    const { artifact } = await fitModel(new ArraySource(asRows(hbk)), options(plain("X1", "X2", "X3"), { estimator: "robust", seed: 0 }));
    const scorer = new Scorer(compileModel(artifact));
    const ranked = hbk
      .map((r, i) => ({ row: i + 1, d2: scorer.score(r).mahalanobisSq }))
      .sort((a, b) => b.d2 - a.d2)
      .slice(0, 14)
      .map((r) => r.row)
      .sort((a, b) => a - b);
    expect(ranked).toEqual(expected.hbk.published_outlier_rows);
  });
});

describe("moments stay flat in memory", () => {
  it("accumulates the same moments as one MomentAccumulator over the transformed rows", async () => {
    const data = gaussianRows(1_000, [2, 1], [1, 0.5, 0.5, 2], 91).map(([a, b]) => [Math.exp(a), b]);
    const { artifact } = await fitModel(
      new ArraySource(asRows(data)),
      options([
        { name: "amount", transform: "log" },
        { name: "b", transform: "none" },
      ]),
    );
    const acc = new MomentAccumulator(2);
    for (const [a, b] of data) acc.push([Math.log(a), b]);
    const cov = acc.covariance("m");
    expect(artifact.segments["*"].mean[0]).toBeCloseTo(acc.mean[0], 12);
    expect(artifact.segments["*"].covariance[0][1]).toBeCloseTo(cov[1], 12);
  });
});
