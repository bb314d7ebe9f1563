import { createHash } from "node:crypto";
import fc from "fast-check";
import { Matrix, determinant } from "ml-matrix";
import { describe, expect, it } from "vitest";
import {
  ArtifactError,
  MAX_MODEL_COLUMNS,
  MAX_SEGMENTS,
  NotPositiveDefiniteError,
  artifactChecksum,
  buildSegment,
  canonicalJson,
  parseArtifact,
  sealArtifact,
  sha256Hex,
} from "./artifact";
import { recordSpecFromArtifact } from "./records/artifact-spec";
import type { ModelArtifact } from "./artifact";
import { cholesky, fromRows, multiply } from "./linalg";
import { fitted, jsonCopy, sealedFixture, spdFrom, unsealedFixture } from "./test-support";
import type { FixtureOptions } from "./test-support";

// A fictional shop's payments: log amount, log1p basket size, hour of day (two columns).
const FEATURES = [fitted("amount", "log"), fitted("basket_items", "log1p"), fitted("hour", "cyclic-hour")];
const POOLED_COV = [0.64, 0.12, 0.02, -0.01, 0.12, 0.25, 0.01, 0.0, 0.02, 0.01, 0.45, 0.05, -0.01, 0.0, 0.05, 0.4];
const WEB_COV = [0.81, 0.2, 0.0, 0.03, 0.2, 0.36, 0.02, 0.0, 0.0, 0.02, 0.5, -0.04, 0.03, 0.0, -0.04, 0.38];
const OPTIONS: FixtureOptions = {
  features: FEATURES,
  segments: {
    "*": { mean: [4.0, 1.1, 0.1, -0.3], covariance: POOLED_COV, rows: 1180 },
    web: { mean: [4.2, 1.3, 0.0, -0.2], covariance: WEB_COV, rows: 700 },
  },
  segmentFallbacks: { kiosk: "40 rows < 320 required" },
};

async function sealed(): Promise<ModelArtifact> {
  return sealedFixture(OPTIONS);
}

/** Runs parseArtifact expecting a refusal; returns the problems. */
async function refusal(input: unknown): Promise<{ path: string; rule: string }[]> {
  try {
    await parseArtifact(input);
  } catch (err) {
    expect(err).toBeInstanceOf(ArtifactError);
    return (err as ArtifactError).problems;
  }
  throw new Error("parseArtifact accepted an artifact that should have been refused");
}

function expectProblem(problems: { path: string; rule: string }[], path: string, rule: RegExp): void {
  const hit = problems.find((p) => p.path === path && rule.test(p.rule));
  expect(hit, `expected a problem at ${path} matching ${rule}; got ${JSON.stringify(problems, null, 1)}`).toBeDefined();
}

/** Applies an edit to a JSON copy and reseals it, so only the edited rule can fail. */
async function tamperAndReseal(edit: (a: ModelArtifact) => void): Promise<ModelArtifact> {
  const copy = jsonCopy(await sealed());
  edit(copy);
  return sealArtifact(copy);
}

describe("canonicalJson", () => {
  it("sorts object keys at every depth, keeps array order and writes no whitespace", () => {
    expect(canonicalJson({ b: [2, 1, { z: 1, a: 2 }], a: { d: 1, c: null }, é: true })).toBe('{"a":{"c":null,"d":1},"b":[2,1,{"a":2,"z":1}],"é":true}');
  });

  it("writes numbers and strings exactly as JSON.stringify does", () => {
    const values = [0.1 + 0.2, -0, 1e21, 5e-324, -123.456e-7, 'quote " and \\ and \n', "ünï"];
    for (const v of values) expect(canonicalJson(v)).toBe(JSON.stringify(v));
  });

  it("gives the same text for an object and its JSON round trip (undefined keys are dropped)", () => {
    fc.assert(
      fc.property(fc.jsonValue(), (v) => {
        expect(canonicalJson(JSON.parse(JSON.stringify(v)))).toBe(canonicalJson(v));
      }),
    );
    expect(canonicalJson({ a: 1, b: undefined })).toBe('{"a":1}');
  });

  it("refuses non-finite numbers and values JSON cannot carry, naming the path", () => {
    expect(() => canonicalJson({ a: [1, Number.NaN] })).toThrow(/\$\.a\[1\]: must be a finite number, got NaN/);
    expect(() => canonicalJson({ a: Infinity })).toThrow(/\$\.a: must be a finite number/);
    expect(() => canonicalJson({ f: () => 1 })).toThrow(/\$\.f: JSON cannot carry a function/);
    expect(() => canonicalJson({ m: Float64Array.of(1) })).toThrow(/\$\.m: must be a plain object or array/);
    expect(() => canonicalJson(10n)).toThrow(/bigint/);
  });
});

describe("sha256Hex", () => {
  it('hashes "abc" to the FIPS 180-2 Appendix B.1 digest', async () => {
    // Published test vector: NIST FIPS 180-2 (2002), Appendix B.1, SHA-256 of "abc".
    expect(await sha256Hex("abc")).toBe("ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  });

  it("agrees with Node's OpenSSL-backed createHash on arbitrary Unicode text", async () => {
    await fc.assert(
      fc.asyncProperty(fc.string({ unit: "binary", maxLength: 200 }), async (s) => {
        expect(await sha256Hex(s)).toBe(createHash("sha256").update(s, "utf8").digest("hex"));
      }),
      { numRuns: 50 },
    );
  });
});

describe("buildSegment", () => {
  it("returns the exact inverse and log-determinant of a 2×2 covariance", () => {
    // Σ = [[4, 2], [2, 3]]: det 8, Σ⁻¹ = [[3, −2], [−2, 4]] / 8.
    const seg = buildSegment(Float64Array.of(1, -1), Float64Array.of(4, 2, 2, 3), 2, 50, {
      estimator: "classical",
      denominator: "m",
    });
    expect(seg.rows).toBe(50);
    expect(seg.mean).toEqual([1, -1]);
    expect(seg.covariance).toEqual([
      [4, 2],
      [2, 3],
    ]);
    expect(seg.logDet).toBeCloseTo(Math.log(8), 14);
    const expected = [0.375, -0.25, -0.25, 0.5];
    seg.precision.flat().forEach((v, k) => expect(v).toBeCloseTo(expected[k], 15));
    expect(seg.precision[0][1]).toBe(seg.precision[1][0]);
  });

  it("satisfies L·Lᵀ = Σ, Σ·Λ = I and ln|Σ| = ml-matrix's determinant for random SPD matrices", () => {
    fc.assert(
      fc.property(
        fc.integer({ min: 1, max: 8 }).chain((n) => fc.tuple(fc.constant(n), fc.array(fc.double({ min: -1, max: 1, noNaN: true }), { minLength: n * n, maxLength: n * n }))),
        ([n, entries]) => {
          const sigma = spdFrom(entries, n, 0.05);
          const seg = buildSegment(new Float64Array(n), sigma, n, 10 * n, { estimator: "classical", denominator: "m" });
          const lam = fromRows(seg.precision);
          const chol = cholesky(sigma, n);
          expect(chol.ok).toBe(true);
          const L = chol.lower;
          for (let i = 0; i < n; i++) {
            for (let j = 0; j < n; j++) {
              let llt = 0;
              for (let k = 0; k < n; k++) llt += L[i * n + k] * L[j * n + k];
              expect(Math.abs(llt - sigma[i * n + j])).toBeLessThanOrEqual(1e-12 * (1 + Math.abs(sigma[i * n + j])));
            }
          }
          const product = multiply(sigma, lam, n);
          for (let i = 0; i < n; i++) {
            for (let j = 0; j < n; j++) {
              expect(Math.abs(product[i * n + j] - (i === j ? 1 : 0))).toBeLessThanOrEqual(1e-8);
            }
          }
          // Independent route: LU determinant from ml-matrix.
          const det = determinant(new Matrix(seg.covariance));
          expect(Math.abs(seg.logDet - Math.log(det))).toBeLessThanOrEqual(1e-9);
        },
      ),
      { numRuns: 200 },
    );
  });

  it("names the column whose Cholesky pivot fails when the covariance is not positive definite", () => {
    // total = subtotal + shipping exactly: the third column is a linear combination of the first two.
    const cov = Float64Array.of(1, 0.5, 1.5, 0.5, 2, 2.5, 1.5, 2.5, 4);
    let caught: unknown;
    try {
      buildSegment(new Float64Array(3), cov, 3, 100, { estimator: "classical", denominator: "m" }, ["subtotal", "shipping", "total"]);
    } catch (err) {
      caught = err;
    }
    expect(caught).toBeInstanceOf(NotPositiveDefiniteError);
    expect((caught as NotPositiveDefiniteError).column).toBe(2);
    expect((caught as NotPositiveDefiniteError).message).toMatch(/Cholesky pivot of total/);
    // An exact copy of a column leaves an exactly zero pivot.
    expect(() => buildSegment(new Float64Array(2), Float64Array.of(2, 2, 2, 2), 2, 100, { estimator: "classical", denominator: "m" }, ["amount", "amount_copy"])).toThrow(
      /Cholesky pivot of amount_copy is .* linear combination of earlier columns/,
    );
  });

  it("refuses a zero-variance column, a wrong size, a non-finite entry and an asymmetric covariance", () => {
    const details = { estimator: "classical", denominator: "m" } as const;
    expect(() => buildSegment(new Float64Array(2), Float64Array.of(1, 0, 0, 0), 2, 9, details)).toThrow(/column 1/);
    expect(() => buildSegment(new Float64Array(3), Float64Array.of(1, 0, 0, 1), 2, 9, details)).toThrow(/mean must have n = 2 entries. Actual: 3/);
    expect(() => buildSegment(new Float64Array(2), Float64Array.of(1, NaN, NaN, 1), 2, 9, details)).toThrow(/covariance\[0\]\[1\] must be finite/);
    expect(() => buildSegment(new Float64Array(2), Float64Array.of(1, 0.5, 0.4, 1), 2, 9, details)).toThrow(/symmetric/);
    expect(() => buildSegment(new Float64Array(2), Float64Array.of(1, 0, 0, 1), 2, 0, details)).toThrow(/rows must be a positive integer/);
  });
});

describe("sealArtifact and parseArtifact", () => {
  it("round-trips a sealed artifact through JSON text unchanged", async () => {
    const artifact = await sealed();
    expect(artifact.checksum).toMatch(/^sha256:[0-9a-f]{64}$/);
    expect(artifact.checksum).toBe(await artifactChecksum(unsealedFixture(OPTIONS)));
    const text = JSON.stringify(artifact);
    expect(await parseArtifact(JSON.parse(text))).toEqual(artifact);
    expect(await parseArtifact(text)).toEqual(artifact);
  });

  it("gives the same checksum whatever the key order of the content", async () => {
    const content = unsealedFixture(OPTIONS);
    const reversed = Object.fromEntries(Object.entries(content).reverse()) as typeof content;
    expect((await sealArtifact(reversed)).checksum).toBe((await sealArtifact(content)).checksum);
  });

  it("accepts a diagonal model whose off-diagonals are zero", async () => {
    const diag = (c: number[]): number[] => c.map((v, k) => (k % 5 === 0 ? v : 0));
    const artifact = await sealedFixture({
      features: FEATURES,
      shape: "diagonal",
      segments: { "*": { mean: [4, 1, 0, 0], covariance: diag(POOLED_COV) } },
    });
    expect((await parseArtifact(jsonCopy(artifact))).covarianceShape).toBe("diagonal");
  });

  it("refuses an artifact with one number changed after sealing (checksum mismatch)", async () => {
    const copy = jsonCopy(await sealed());
    copy.segments.web.mean[0] += 1e-9;
    expectProblem(await refusal(copy), "checksum", /altered after sealing/);
  });

  it("refuses an altered checksum", async () => {
    const copy = jsonCopy(await sealed());
    const last = copy.checksum.at(-1) === "0" ? "1" : "0";
    copy.checksum = copy.checksum.slice(0, -1) + last;
    expectProblem(await refusal(copy), "checksum", /must equal the SHA-256/);
    copy.checksum = "md5:abc";
    expectProblem(await refusal(copy), "checksum", /sha256:/);
  });

  it("refuses a non-symmetric precision, naming the element", async () => {
    const bad = await tamperAndReseal((a) => {
      a.segments.web.precision[2][1] += 1e-3;
    });
    expectProblem(await refusal(bad), "segments.web.precision[2][1]", /symmetric/);
  });

  it("refuses a precision that is not positive definite", async () => {
    const bad = await tamperAndReseal((a) => {
      const p = a.segments["*"].precision;
      for (const row of p) for (let j = 0; j < row.length; j++) row[j] = -row[j];
    });
    const problems = await refusal(bad);
    expectProblem(problems, 'segments["*"].precision', /must be positive definite: the Cholesky pivot of amount/);
  });

  it("refuses a covariance that is not positive definite", async () => {
    const bad = await tamperAndReseal((a) => {
      a.segments.web.covariance[3][3] = -0.1;
    });
    expectProblem(await refusal(bad), "segments.web.covariance", /positive definite: the Cholesky pivot of hour\.cos/);
  });

  it("refuses a precision that is the inverse of another covariance", async () => {
    const bad = await tamperAndReseal((a) => {
      a.segments.web.precision = a.segments["*"].precision;
    });
    expectProblem(await refusal(bad), "segments.web.precision", /precision·covariance must equal the identity/);
  });

  it("refuses a logDet that is not ln|covariance|", async () => {
    const bad = await tamperAndReseal((a) => {
      a.segments.web.logDet += 1e-6;
      a.cutoff.logDensity.web -= 0.5e-6;
    });
    const problems = await refusal(bad);
    expectProblem(problems, "segments.web.logDet", /must equal ln\|covariance\|/);
    expect(problems.filter((p) => p.path.startsWith("cutoff"))).toEqual([]);
  });

  it("refuses segments of the wrong size", async () => {
    const bad = await tamperAndReseal((a) => {
      a.segments.web.mean.pop();
      a.segments["*"].precision[1].push(0);
      a.segments["*"].covariance.pop();
    });
    const problems = await refusal(bad);
    expectProblem(problems, "segments.web.mean", /must have n = 4 entries. Actual: 3/);
    expectProblem(problems, 'segments["*"].precision[1]', /must have n = 4 entries. Actual: 5/);
    expectProblem(problems, 'segments["*"].covariance', /must have n = 4 rows. Actual: 3/);
  });

  it('refuses an artifact without the pooled segment "*"', async () => {
    const bad = await tamperAndReseal((a) => {
      delete (a.segments as Record<string, unknown>)["*"];
      delete a.cutoff.logDensity["*"];
    });
    expectProblem(await refusal(bad), 'segments["*"]', /pooled segment "\*" is required/);
  });

  it("refuses a truncated artifact, as JSON text or as an object with fields missing", async () => {
    const text = JSON.stringify(await sealed());
    expectProblem(await refusal(text.slice(0, Math.floor(text.length / 2))), "(artifact)", /must be valid JSON/);
    const copy = jsonCopy(await sealed()) as Partial<ModelArtifact>;
    delete copy.cutoff;
    delete copy.training;
    const problems = await refusal(copy);
    expectProblem(problems, "cutoff", /is required/);
    expectProblem(problems, "training", /is required/);
    expectProblem(await refusal(null), "(artifact)", /must be a JSON object. Actual: null/);
    expectProblem(await refusal([]), "(artifact)", /Actual: an array/);
  });

  it("refuses a diagonal model with non-zero off-diagonals", async () => {
    const bad = await tamperAndReseal((a) => {
      a.covarianceShape = "diagonal";
    });
    const problems = await refusal(bad);
    expectProblem(problems, 'segments["*"].covariance[0][1]', /must be 0 in a diagonal model/);
    expectProblem(problems, "segments.web.precision[0][1]", /must be 0 in a diagonal model/);
  });

  it("refuses unknown keys anywhere, naming each", async () => {
    const bad = await tamperAndReseal((a) => {
      (a as Record<string, unknown>).comment = "hello";
      (a.segments.web as Record<string, unknown>).note = 1;
      (a.features[0] as unknown as Record<string, unknown>).unit = "EUR";
    });
    const problems = await refusal(bad);
    expectProblem(problems, "comment", /unknown keys are refused/);
    expectProblem(problems, "segments.web.note", /unknown keys are refused/);
    expectProblem(problems, "features[0].unit", /unknown keys are refused/);
  });

  it("refuses a __proto__ key that zod would otherwise drop without a word", async () => {
    const text = JSON.stringify(await sealed()).replace('"segmentFallbacks":{', '"segmentFallbacks":{"__proto__":"x",');
    expectProblem(await refusal(text), "segmentFallbacks.__proto__", /reserved key/);
  });

  it("refuses cutoff log-densities that disagree with the d² cutoff, or miss a segment", async () => {
    const bad = await tamperAndReseal((a) => {
      a.cutoff.logDensity.web += 0.01;
      delete a.cutoff.logDensity["*"];
      a.cutoff.logDensity.kiosk = -3;
      a.cutoff.tailProbability /= 2;
    });
    const problems = await refusal(bad);
    expectProblem(problems, "cutoff.logDensity.web", /must equal −½\(n ln 2π \+ logDet \+ cutoff.mahalanobisSq\)/);
    expectProblem(problems, 'cutoff.logDensity["*"]', /is required/);
    expectProblem(problems, "cutoff.logDensity.kiosk", /names no segment/);
    expectProblem(problems, "cutoff.tailProbability", /P\(χ²_4 > cutoff.mahalanobisSq\)/);
  });

  it("refuses a fallback that names a fitted segment, and columns that are not the features' columns", async () => {
    const bad = await tamperAndReseal((a) => {
      a.segmentFallbacks.web = "too few rows";
      a.columns[3] = "hour.cosine";
      a.features[1].columns = ["basket"];
    });
    const problems = await refusal(bad);
    expectProblem(problems, "segmentFallbacks.web", /must not name a fitted segment/);
    expectProblem(problems, "features[1].columns", /must be \["basket_items"\]/);
  });

  it("refuses more columns or segments than the size limits allow, naming the limit", async () => {
    const wide = jsonCopy(await sealed()) as unknown as Record<string, unknown>;
    wide.columns = Array.from({ length: MAX_MODEL_COLUMNS + 1 }, (_, i) => `c${i}`);
    expectProblem(await refusal(wide), "columns", new RegExp(`at most ${MAX_MODEL_COLUMNS} model columns.*Actual: 257`));
    const many = jsonCopy(await sealed());
    const seg = many.segments.web;
    for (let i = 0; i < MAX_SEGMENTS; i++) many.segments[`s${i}`] = seg;
    expectProblem(await refusal(many), "segments", new RegExp(`at most ${MAX_SEGMENTS} segments.*Actual: 1002`));
  });

  it("lists every problem and joins them in the message", async () => {
    const bad = await tamperAndReseal((a) => {
      a.segments.web.logDet = 0;
      a.covarianceShape = "diagonal";
    });
    try {
      await parseArtifact(bad);
      throw new Error("accepted");
    } catch (err) {
      const e = err as ArtifactError;
      expect(e.problems.length).toBeGreaterThanOrEqual(3);
      for (const p of e.problems) expect(e.message).toContain(`${p.path}: ${p.rule}`);
    }
  });

  it("refuses a yeo-johnson feature without λ and a λ on any other transform", async () => {
    const bad = await tamperAndReseal((a) => {
      a.features[0] = { ...a.features[0], lambda: 0.5 };
    });
    expectProblem(await refusal(bad), "features[0].lambda", /only allowed for the yeo-johnson transform/);
    const missing = await tamperAndReseal((a) => {
      a.features[1] = { name: "basket_items", transform: "yeo-johnson", columns: ["basket_items"] };
    });
    expectProblem(await refusal(missing), "features[1].lambda", /is required for the yeo-johnson transform/);
  });

  it("accepts a feature's observed training range and refuses one whose min exceeds its max", async () => {
    const good = await tamperAndReseal((a) => {
      a.features[0] = { ...a.features[0], observed: { min: 1.5, max: 980 } };
    });
    await expect(parseArtifact(good)).resolves.toBeTruthy();
    const bad = await tamperAndReseal((a) => {
      a.features[0] = { ...a.features[0], observed: { min: 980, max: 1.5 } };
    });
    expectProblem(await refusal(bad), "features[0].observed", /min must not exceed max/);
  });

  it("carries a record spec (mapping and derivations) that a scorer reads back, and keeps older artifacts' checksums", async () => {
    const plain = await sealed();
    const withRecords = await tamperAndReseal((a) => {
      a.record = { id: "paymentId", time: "createdAt", account: "accountRef", lateness: "1h", retention: "30d" };
      a.features[1] = { ...a.features[1], derive: { count: { within: "24h" } } };
      a.features[2] = { ...a.features[2], derive: { hourOfDay: { utcOffset: "+01:00" } } };
    });
    const parsed = await parseArtifact(JSON.parse(JSON.stringify(withRecords)));
    const spec = recordSpecFromArtifact(parsed)!;
    expect(spec.record).toEqual({ id: "paymentId", time: "createdAt", account: "accountRef" });
    expect(spec.features.map((f) => f.derivation.kind)).toEqual(["read", "count", "hourOfDay"]);
    // An artifact without the new keys hashes exactly as before: absent keys are not in the canonical text.
    expect(await artifactChecksum(plain)).toBe(plain.checksum);
    expect(canonicalJson(plain)).not.toContain("derive");
    expect(recordSpecFromArtifact(plain)).toBeNull();
  });

  it("refuses a stored derivation that needs a record mapping the artifact lacks, naming the feature and key", async () => {
    const bad = await tamperAndReseal((a) => {
      a.features[1] = { ...a.features[1], derive: { count: { within: "24h" } } };
    });
    expectProblem(await refusal(bad), "features[1].count", /needs the spec's top-level "record".*\(feature "basket_items"\)/);
    const twoKeys = await tamperAndReseal((a) => {
      a.features[1] = { ...a.features[1], derive: { count: { within: "24h" }, column: "x" } as never };
    });
    expectProblem(await refusal(twoKeys), "features[1].derive", /at most one of/);
  });
});
