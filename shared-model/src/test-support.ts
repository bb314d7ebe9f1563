/**
 * Test support for the shared-model tests: assembles small sealed artifacts from
 * hand-made Gaussians (invented numbers for a fictional shop) through the real builder and
 * sealer, and reads the reference CSV files. Not part of the public surface (index.ts does not
 * export it).
 */
import fc from "fast-check";
import { expect } from "vitest";
import { buildSegment, sealArtifact } from "./artifact";
import type { ModelArtifact, UnsealedArtifact, ArtifactSegment } from "./artifact";
import { chiSquareSurvival } from "./distributions";
import { columnsOf } from "./features";
import type { FitRow, RowSource } from "./fit";
import type { SeededStream } from "./seeded-stream";
import type { CovarianceShape, EstimatorDetails, FittedFeature, TransformKind } from "./types";

/** How deep the randomized and long tests go: `quick` for `npm test`, `thorough` in CI. */
export type TestDepth = "quick" | "thorough";

/**
 * The test depth, from `ISODENSE_TEST_DEPTH` (`.ci/run` sets `thorough`; unset or anything else is
 * `quick`). Heavy cases scale with it — more simulation draws, 10,000 fuzz inputs per endpoint
 * instead of a few hundred — so `npm test` stays within its five minutes and CI still goes deep.
 * Reads `process.env` only when there is one, so it also works where tests run without Node globals.
 *
 * @example
 * const reps = testDepth() === "thorough" ? 2000 : 300;
 */
export function testDepth(): TestDepth {
  const env = (globalThis as { process?: { env?: Record<string, string | undefined> } }).process?.env;
  return env?.ISODENSE_TEST_DEPTH === "thorough" ? "thorough" : "quick";
}

/**
 * `quick` or `thorough` by the test depth.
 * @example const draws = byTestDepth({ quick: 300, thorough: 2000 });
 */
export function byTestDepth<T>(values: Record<TestDepth, T>): T {
  return values[testDepth()];
}

const LN_2PI = Math.log(2 * Math.PI);
const CLASSICAL: EstimatorDetails = { estimator: "classical", denominator: "m" };

/** A fitted feature with the columns its transform produces. */
export function fitted(name: string, transform: TransformKind, lambda?: number): FittedFeature {
  const decl = { name, transform };
  return lambda === undefined ? { ...decl, columns: columnsOf(decl) } : { ...decl, lambda, columns: columnsOf(decl) };
}

/** One segment's Gaussian for a fixture: mean (length n) and covariance (n×n row-major). */
export interface FixtureSegment {
  mean: ArrayLike<number>;
  covariance: ArrayLike<number>;
  rows?: number;
}

/** Options of {@link unsealedFixture}. */
export interface FixtureOptions {
  features: FittedFeature[];
  /** Must contain `*`. */
  segments: Record<string, FixtureSegment>;
  shape?: CovarianceShape;
  cutoffMahalanobisSq?: number;
  segmentBy?: string | null;
  segmentFallbacks?: Record<string, string>;
}

/** A consistent, unsealed artifact built with the real {@link buildSegment}. */
export function unsealedFixture(options: FixtureOptions): UnsealedArtifact {
  const columns = options.features.flatMap((f) => f.columns);
  const n = columns.length;
  const segments: Record<string, ArtifactSegment> = {};
  for (const key of Object.keys(options.segments)) {
    const s = options.segments[key];
    segments[key] = buildSegment(Float64Array.from(s.mean), Float64Array.from(s.covariance), n, s.rows ?? 500, CLASSICAL, columns);
  }
  const cut = options.cutoffMahalanobisSq ?? 3 * n;
  const logDensity: Record<string, number> = {};
  for (const key of Object.keys(segments)) logDensity[key] = -0.5 * (n * LN_2PI + segments[key].logDet + cut);
  const pooled = segments["*"];
  const columnEdges = columns.map((_, j) => {
    const mu = pooled.mean[j];
    const sd = Math.sqrt(pooled.covariance[j][j]);
    return [mu - 1.2816 * sd, mu, mu + 1.2816 * sd];
  });
  const multiSegment = Object.keys(segments).length > 1 || Object.keys(options.segmentFallbacks ?? {}).length > 0;
  return {
    format: "isodense.model/v1",
    version: "m20261201-0a1b2c3d",
    createdAt: "2026-12-01T09:30:00Z",
    features: options.features,
    columns,
    covarianceShape: options.shape ?? "full",
    shapeReason: "requested by the test",
    estimator: "classical",
    segmentBy: options.segmentBy !== undefined ? options.segmentBy : multiSegment ? "channel" : null,
    minSegmentRows: 320,
    segments,
    segmentFallbacks: options.segmentFallbacks ?? {},
    cutoff: {
      mahalanobisSq: cut,
      tailProbability: chiSquareSurvival(cut, n),
      logDensity,
      basis: "flag-rate",
      flagRate: 0.01,
    },
    training: { rowsRead: 1200, rowsUsed: 1180, rowsExcludedAsFraud: 20, source: "ledger-fixture.csv" },
    diagnostics: [],
    reference: { columnEdges, scoreEdges: [0.5, 1.5, 3] },
  };
}

/** {@link unsealedFixture}, sealed with the real {@link sealArtifact}. */
export async function sealedFixture(options: FixtureOptions): Promise<ModelArtifact> {
  return sealArtifact(unsealedFixture(options));
}

/** Deep copy through JSON, as an artifact travels. */
export function jsonCopy<T>(value: T): T {
  return JSON.parse(JSON.stringify(value)) as T;
}

/**
 * Parses a small numeric CSV with a header row; returns the header and the rows as numbers
 * (non-numeric cells, such as iris's species, become NaN).
 */
export function parseCsv(text: string): { header: string[]; rows: number[][] } {
  const lines = text.trim().split(/\r?\n/);
  const header = lines[0].split(",").map((h) => h.replace(/^"|"$/g, ""));
  const rows = lines.slice(1).map((line) => line.split(",").map((cell) => Number(cell.replace(/^"|"$/g, ""))));
  return { header, rows };
}

/**
 * Generated cases for quadratic-form tests: a size n in 1…maxN, n² entries in [−1, 1] for
 * {@link spdFrom}, a mean and a point with coordinates in [−50, 50].
 */
export function spdCases(maxN: number) {
  return fc.integer({ min: 1, max: maxN }).chain((n) =>
    fc.record({
      n: fc.constant(n),
      entries: fc.array(fc.double({ min: -1, max: 1, noNaN: true }), { minLength: n * n, maxLength: n * n }),
      mean: fc.array(fc.double({ min: -50, max: 50, noNaN: true }), { minLength: n, maxLength: n }),
      x: fc.array(fc.double({ min: -50, max: 50, noNaN: true }), { minLength: n, maxLength: n }),
    }),
  );
}

/** A random symmetric positive definite n×n matrix A·Aᵀ + ridge·I from entries in [−1, 1]. */
export function spdFrom(entries: readonly number[], n: number, ridge: number): Float64Array {
  const s = new Float64Array(n * n);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j <= i; j++) {
      let v = 0;
      for (let k = 0; k < n; k++) v += entries[i * n + k] * entries[j * n + k];
      s[i * n + j] = v;
      s[j * n + i] = v;
    }
    s[i * n + i] += ridge;
  }
  return s;
}

/** Fails with the worst relative difference, its index and both values (for outside reference checks). */
export function expectRelativelyClose(actual: ArrayLike<number>, wanted: readonly number[], tolerance: number, label: string): void {
  expect(actual.length, `${label}: length`).toBe(wanted.length);
  let worst = 0;
  let at = -1;
  for (let k = 0; k < wanted.length; k++) {
    const rel = Math.abs(actual[k] - wanted[k]) / Math.abs(wanted[k]);
    if (!(rel <= worst)) {
      worst = rel;
      at = k;
    }
  }
  expect(worst, `${label}: worst relative difference ${worst} at [${at}]: got ${actual[at]}, expected ${wanted[at]}`).toBeLessThanOrEqual(tolerance);
}

/**
 * m rows of a correlated 8-column Gaussian (x = L·z, L fixed lower-triangular with 1 on the diagonal
 * and 0.3 below), for the out-of-sample simulations of the cutoff and tail laws.
 */
export function correlatedGaussianRows(stream: SeededStream, m: number, n = 8): Float64Array[] {
  return Array.from({ length: m }, () => {
    const z = Array.from({ length: n }, () => stream.normal());
    return Float64Array.from({ length: n }, (_, i) => {
      let v = 0;
      for (let k = 0; k <= i; k++) v += (k === i ? 1 : 0.3) * z[k];
      return v;
    });
  });
}

/** A fit's row source over rows held in memory, all in the pooled segment. */
export function rowSource(rows: readonly Float64Array[]): RowSource {
  return {
    async *pass(): AsyncGenerator<FitRow> {
      for (const values of rows) yield { values, segment: null };
    },
  };
}
