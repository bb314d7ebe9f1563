/**
 * The model artifact: the one JSON document that carries a fitted model from the fit to every
 * scorer (CLI, worker, UI). This module defines its schema, seals it with a checksum, and refuses
 * any artifact that is malformed, inconsistent or altered, listing every problem with the path
 * and the rule it broke.
 *
 * Matrices are `number[][]` (rows) in JSON and row-major `Float64Array`s everywhere else.
 */
import { InputError } from "./input-error";
import { z } from "zod";
import { chiSquareSurvival } from "./distributions";
import { formatFieldPath, joinFieldPath } from "./field-path";
import { formatForPeople } from "./format-number";
import { logDensityAt } from "./log-density";
import { columnsOf } from "./features";
import { cholesky, inverseFromCholesky, logDetFromCholesky, symmetrize, toRows } from "./linalg";
import type { CholeskyResult } from "./linalg";
import type { EstimatorDetails } from "./types";
import { FeatureSpecError } from "./features";
import { recordSpecFromArtifact } from "./records/artifact-spec";
import { derivationJsonSchema, recordMappingSchema } from "./records/spec";

/** Format tag of the artifact JSON; bumped when the layout changes incompatibly. */
export const MODEL_FORMAT = "isodense.model/v1";

/** Largest number of model columns an artifact may carry (guards against absurd uploads). */
export const MAX_MODEL_COLUMNS = 256;

/** Largest number of segments an artifact may carry, `*` included (guards against absurd uploads). */
export const MAX_SEGMENTS = 1000;

/**
 * Largest relative asymmetry max|A_ij − A_ji| / max|A_ij| accepted in a stored covariance or
 * precision. Both are written exactly symmetric by {@link buildSegment}; 1e-12 leaves room for a
 * foreign writer that accumulates in a different order, and nothing more.
 */
export const SYMMETRY_TOLERANCE = 1e-12;

/**
 * Largest accepted deviation of precision·covariance from the identity, measured after scaling
 * to unit variances: max_ij |d_i (ΛΣ − I)_ij / d_j| with d_i = √Σ_ii, i.e. the deviation of
 * R⁻¹·R for the correlation matrix R. Unscaled entries of ΛΣ carry units (u_j/u_i), so a raw
 * threshold would depend on the currency of `amount`; the scaled one does not.
 * Why 1e-6: the rounding error of an inverse from a Cholesky factor is about n·κ(R)·ε
 * (Higham 2002, Accuracy and Stability of Numerical Algorithms, §14.3), so 1e-6 admits condition
 * numbers up to ~1e7 at n = 256 (far beyond what a usable fit has), while a precision that
 * belongs to another covariance (stale, swapped or edited) deviates by orders of magnitude more.
 */
export const INVERSE_TOLERANCE = 1e-6;

/** Largest accepted |logDet − 2·Σ ln L_ii| (absolute; ln|Σ| is dimensionless in this sense). */
export const LOG_DET_TOLERANCE = 1e-8;

// ---------------------------------------------------------------------------------------------
// Schema
// ---------------------------------------------------------------------------------------------

const finite = z.number();
const count = z.number().int().nonnegative();
const vector = z.array(finite).max(MAX_MODEL_COLUMNS);
const matrix = z.array(vector).max(MAX_MODEL_COLUMNS);

const featureSchema = z.strictObject({
  name: z.string().min(1),
  transform: z.enum(["none", "log", "log1p", "yeo-johnson", "cyclic-hour"]),
  lambda: finite.optional(),
  observed: z.strictObject({ min: finite, max: finite }).optional(),
  columns: z.array(z.string().min(1)).min(1).max(2),
  /** How the raw value is derived from a payment record (absent: read the column of its name). */
  derive: derivationJsonSchema.optional(),
});

const detailsSchema = z.discriminatedUnion("estimator", [
  z.strictObject({ estimator: z.literal("classical"), denominator: z.literal("m") }),
  z.strictObject({
    estimator: z.literal("shrinkage"),
    denominator: z.literal("m"),
    shrinkage: finite.min(0).max(1),
    target: z.literal("scaled-identity"),
  }),
  z.strictObject({
    estimator: z.literal("robust"),
    h: z.number().int().positive(),
    rawLogDet: finite,
    consistencyFactor: finite.positive(),
    reweightedRows: count,
    seed: z.number().int(),
  }),
]);

const segmentSchema = z.strictObject({
  rows: z.number().int().positive(),
  mean: vector,
  covariance: matrix,
  precision: matrix,
  logDet: finite,
  details: detailsSchema,
  /**
   * The law its payments' tail probabilities are read from (`tail-law.ts`): `predictive` where the
   * cutoff was chosen by a new point's predictive law; absent in artifacts written before it was
   * stored, which read χ².
   */
  tailLaw: z.enum(["chi-square", "predictive"]).optional(),
});

const diagnosticSchema = z.strictObject({
  code: z.string().min(1),
  severity: z.enum(["error", "warning", "info"]),
  message: z.string(),
  columns: z.array(z.string()).optional(),
  equation: z.string().optional(),
  remedy: z.string().optional(),
});

/**
 * zod 4 schema of the artifact JSON (`isodense.model/v1`). Every object is strict: an unknown key
 * is refused, so a typo never silently drops a setting. The schema checks shapes and types only;
 * {@link parseArtifact} adds the sizes, the linear algebra and the checksum.
 */
export const modelArtifactSchema = z.strictObject({
  format: z.literal(MODEL_FORMAT),
  version: z.string().min(1).max(200),
  createdAt: z.iso.datetime({ offset: true }),
  /** Ledger columns that identify a payment record; present when the features derive from records. */
  record: recordMappingSchema.optional(),
  features: z.array(featureSchema).min(1).max(MAX_MODEL_COLUMNS),
  columns: z.array(z.string().min(1)).min(1).max(MAX_MODEL_COLUMNS),
  covarianceShape: z.enum(["full", "diagonal"]),
  shapeReason: z.string(),
  estimator: z.enum(["classical", "shrinkage", "robust"]),
  segmentBy: z.string().min(1).nullable(),
  minSegmentRows: count,
  segments: z.record(z.string().min(1), segmentSchema),
  segmentFallbacks: z.record(z.string().min(1), z.string()),
  cutoff: z.strictObject({
    mahalanobisSq: finite.nonnegative(),
    tailProbability: finite.min(0).max(1),
    logDensity: z.record(z.string().min(1), finite),
    basis: z.enum(["flag-rate", "f1", "capacity", "cost", "manual"]),
    flagRate: finite.min(0).max(1).nullable(),
    /** How the fit chose a flag-rate cutoff (`cutoff-law.ts`); absent in older artifacts and after retuning. */
    law: z.enum(["deleted-distance", "predictive", "in-sample"]).optional(),
  }),
  training: z.strictObject({
    rowsRead: count,
    rowsUsed: count,
    rowsExcludedAsFraud: count,
    source: z.string().nullable(),
  }),
  diagnostics: z.array(diagnosticSchema),
  reference: z.strictObject({
    columnEdges: z.array(vector).max(MAX_MODEL_COLUMNS),
    scoreEdges: z.array(finite.nonnegative()),
    /**
     * Training share of each drift bucket (edges + 1 per column), counted at fit time; absent in
     * artifacts written before it was stored, whose drift falls back to equal shares.
     */
    columnShares: z
      .array(z.array(finite.min(0).max(1)))
      .max(MAX_MODEL_COLUMNS)
      .optional(),
    scoreShares: z.array(finite.min(0).max(1)).optional(),
  }),
  checksum: z.string().regex(/^sha256:[0-9a-f]{64}$/, 'must be "sha256:" followed by 64 lower-case hex digits'),
});

/** A parsed, verified model artifact. */
export type ModelArtifact = z.infer<typeof modelArtifactSchema>;
/** The artifact before {@link sealArtifact} adds the checksum. */
export type UnsealedArtifact = Omit<ModelArtifact, "checksum">;
/** One segment's fitted Gaussian as stored in the artifact (matrices as rows). */
export type ArtifactSegment = ModelArtifact["segments"][string];

// ---------------------------------------------------------------------------------------------
// Errors
// ---------------------------------------------------------------------------------------------

/** One reason an artifact was refused: where (`segments.web.precision[2][3]`) and which rule. */
export interface ArtifactProblem {
  path: string;
  rule: string;
}

/** Most problems listed in one {@link ArtifactError}; the rest are counted in a final entry. */
const MAX_PROBLEMS = 200;

/**
 * Thrown by {@link parseArtifact}: lists every problem found, each with its path and rule; the
 * message joins them so a log line alone is enough to act on.
 */
export class ArtifactError extends InputError {
  readonly problems: ArtifactProblem[];
  constructor(problems: ArtifactProblem[]) {
    const listed =
      problems.length > MAX_PROBLEMS ? [...problems.slice(0, MAX_PROBLEMS), { path: "(artifact)", rule: `${problems.length - MAX_PROBLEMS} more problems not listed` }] : problems;
    super(listed[0]?.path ?? "(artifact)", listed[0]?.rule ?? "refused", `model artifact refused: ${listed.map((p) => `${p.path}: ${p.rule}`).join("; ")}`);
    this.problems = listed;
  }
}

/**
 * Thrown by {@link buildSegment} when the covariance is not numerically positive definite; names
 * the column whose Cholesky pivot failed (the first column that is, to rounding, a linear
 * combination of the earlier ones, or has zero variance).
 */
export class NotPositiveDefiniteError extends Error {
  /** 0-based model column where the pivot failed. */
  readonly column: number;
  /** Column name when known, else `column <index>`. */
  readonly columnName: string;
  /** The pivot Σ_kk − Σ_j L_kj²: the variance of the column left unexplained by earlier columns. */
  readonly pivot: number;
  constructor(column: number, columnName: string, pivot: number, variance: number) {
    const share = pivot > 0 && variance > 0 ? ` (${formatForPeople(pivot / variance, 6)} of its variance ${formatForPeople(variance, 6)})` : "";
    super(
      `covariance is not positive definite: the Cholesky pivot of ${columnName} is ${formatForPeople(pivot, 6)}${share}, ` +
        `so the column has zero variance or is (numerically) a linear combination of earlier columns`,
    );
    this.name = "NotPositiveDefiniteError";
    this.column = column;
    this.columnName = columnName;
    this.pivot = pivot;
  }
}

/**
 * Smallest accepted Cholesky pivot relative to the column's variance, L_kk² / Σ_kk = 1 − R²_k
 * (the share of column k's variance not explained by the earlier columns). Below 1e-10 the column
 * is a linear combination of the others up to rounding (R² > 1 − 1e-10): the inverse would be
 * dominated by rounding error, so the column is named instead.
 */
export const RELATIVE_PIVOT_FLOOR = 1e-10;

// ---------------------------------------------------------------------------------------------
// Canonical JSON and checksum
// ---------------------------------------------------------------------------------------------

/**
 * Deterministic JSON: object keys sorted (by UTF-16 code units, as `Array.prototype.sort` does),
 * arrays in order, no whitespace, numbers and strings exactly as `JSON.stringify` writes them.
 * Keys whose value is `undefined` are left out, as `JSON.stringify` does, so an object and its
 * JSON round trip give the same text.
 * @throws TypeError naming the path of a non-finite number, or of a value JSON cannot carry
 *   (function, symbol, bigint, typed array, class instance).
 * @example canonicalJson({ b: [2, 1], a: { d: 1, c: null } }) // '{"a":{"c":null,"d":1},"b":[2,1]}'
 */
export function canonicalJson(value: unknown): string {
  const parts: string[] = [];
  writeCanonical(value, [], parts);
  return parts.join("");
}

/** `$.a[1].b` from path parts, written as every field path is (`field-path.ts`); built only when an error is thrown. */
function pathText(path: readonly (string | number)[]): string {
  return formatFieldPath(path, "$");
}

function writeCanonical(value: unknown, path: (string | number)[], out: string[]): void {
  if (value === null) {
    out.push("null");
    return;
  }
  switch (typeof value) {
    case "number":
      if (!Number.isFinite(value)) throw new TypeError(`${pathText(path)}: must be a finite number, got ${String(value)}`);
      out.push(JSON.stringify(value));
      return;
    case "string":
    case "boolean":
      out.push(JSON.stringify(value));
      return;
    case "object":
      break;
    default:
      throw new TypeError(`${pathText(path)}: JSON cannot carry a ${typeof value}`);
  }
  if (Array.isArray(value)) {
    // Rows of finite numbers are the bulk of an artifact: JSON.stringify writes them identically.
    if (value.every((item) => typeof item === "number" && Number.isFinite(item))) {
      out.push(JSON.stringify(value));
      return;
    }
    out.push("[");
    for (let i = 0; i < value.length; i++) {
      if (i > 0) out.push(",");
      path.push(i);
      writeCanonical(value[i], path, out);
      path.pop();
    }
    out.push("]");
    return;
  }
  const proto = Object.getPrototypeOf(value);
  if (proto !== Object.prototype && proto !== null) {
    throw new TypeError(`${pathText(path)}: must be a plain object or array (convert typed arrays with Array.from)`);
  }
  const record = value as Record<string, unknown>;
  const keys = Object.keys(record)
    .filter((k) => record[k] !== undefined)
    .sort();
  out.push("{");
  keys.forEach((key, i) => {
    if (i > 0) out.push(",");
    out.push(JSON.stringify(key), ":");
    path.push(key);
    writeCanonical(record[key], path, out);
    path.pop();
  });
  out.push("}");
}

/**
 * Lower-case hex SHA-256 of the UTF-8 bytes of `text`, with the Web Crypto API (Node 20, workerd
 * and browsers all provide the Web Crypto `crypto.subtle`).
 * @example await sha256Hex("abc") // "ba7816bf…f20015ad" (FIPS 180-2, Appendix B.1)
 */
export async function sha256Hex(text: string): Promise<string> {
  const digest = await crypto.subtle.digest("SHA-256", new TextEncoder().encode(text));
  const bytes = new Uint8Array(digest);
  let hex = "";
  for (const b of bytes) hex += b.toString(16).padStart(2, "0");
  return hex;
}

/**
 * The checksum an artifact must carry: `"sha256:" + hex` of {@link canonicalJson} of every field
 * but `checksum` (a `checksum` key in `content` is ignored).
 * @throws TypeError when the content holds a non-finite number or a non-JSON value.
 */
export async function artifactChecksum(content: object): Promise<string> {
  const { checksum: _ignored, ...rest } = content as Record<string, unknown>;
  return `sha256:${await sha256Hex(canonicalJson(rest))}`;
}

/**
 * Adds the checksum to a finished artifact. Does not validate the content: run
 * {@link parseArtifact} on the result (the fit does) to prove it loads.
 * @throws TypeError when the content holds a non-finite number or a non-JSON value.
 * @example const artifact = await sealArtifact(unsealed); // artifact.checksum = "sha256:…"
 */
export async function sealArtifact(content: UnsealedArtifact): Promise<ModelArtifact> {
  const { checksum: _ignored, ...rest } = content as UnsealedArtifact & { checksum?: unknown };
  const checksum = await artifactChecksum(rest);
  return { ...rest, checksum };
}

// ---------------------------------------------------------------------------------------------
// Segment builder
// ---------------------------------------------------------------------------------------------

/**
 * Turns an estimate (mean μ, covariance Σ) into the stored segment: symmetrises Σ, factors it
 * (Cholesky), takes ln|Σ| = 2·Σ ln L_ii and the precision Λ = Σ⁻¹ from the factor, and checks
 * that Λ·Σ ≈ I within {@link INVERSE_TOLERANCE} so that every segment it returns passes
 * {@link parseArtifact}. The covariance denominator (m, m−1, or h for MCD) is the estimator's and
 * is recorded in `details`; this function does not rescale.
 * @param mean length n
 * @param covariance n×n, row-major, symmetric (relative asymmetry ≤ {@link SYMMETRY_TOLERANCE})
 * @param columns optional model column names, used to name the failing column in errors
 * @throws NotPositiveDefiniteError naming the column whose Cholesky pivot fails, or is below
 *   {@link RELATIVE_PIVOT_FLOOR} of the column's variance
 * @throws RangeError on wrong sizes, non-finite entries, an asymmetric covariance, a bad row
 *   count, or a covariance so ill-conditioned that its inverse is inaccurate
 * @example buildSegment(Float64Array.of(0, 0), Float64Array.of(4, 2, 2, 3), 2, 50, { estimator: "classical", denominator: "m" })
 *   // { rows: 50, mean: [0, 0], covariance: [[4, 2], [2, 3]], precision: [[0.375, -0.25], [-0.25, 0.5]], logDet: ln 8, … }
 */
export function buildSegment(mean: Float64Array, covariance: Float64Array, n: number, rows: number, details: EstimatorDetails, columns?: readonly string[]): ArtifactSegment {
  if (!Number.isInteger(n) || n < 1 || n > MAX_MODEL_COLUMNS) {
    throw new RangeError(`n must be an integer in [1, ${MAX_MODEL_COLUMNS}]. Actual: ${n}.`);
  }
  if (mean.length !== n) throw new RangeError(`mean must have n = ${n} entries. Actual: ${mean.length}.`);
  if (covariance.length !== n * n) {
    throw new RangeError(`covariance must have n·n = ${n * n} entries. Actual: ${covariance.length}.`);
  }
  if (!Number.isInteger(rows) || rows < 1) throw new RangeError(`rows must be a positive integer. Actual: ${rows}.`);
  const name = (k: number): string => columns?.[k] ?? `column ${k}`;
  for (let i = 0; i < n; i++) {
    if (!Number.isFinite(mean[i])) throw new RangeError(`mean of ${name(i)} must be finite. Actual: ${mean[i]}.`);
  }
  for (let i = 0; i < n * n; i++) {
    if (!Number.isFinite(covariance[i])) {
      throw new RangeError(`covariance[${Math.floor(i / n)}][${i % n}] must be finite. Actual: ${covariance[i]}.`);
    }
  }
  const asym = worstAsymmetry(covariance, n);
  if (asym.relative > SYMMETRY_TOLERANCE) {
    throw new RangeError(
      `covariance must be symmetric: covariance[${asym.i}][${asym.j}] differs from [${asym.j}][${asym.i}] by ` +
        `${formatForPeople(asym.relative, 6)} relative (limit ${SYMMETRY_TOLERANCE})`,
    );
  }
  const sym = symmetrize(covariance, n);
  const chol = cholesky(sym, n);
  if (!chol.ok) {
    const k = chol.failedAt;
    throw new NotPositiveDefiniteError(k, name(k), chol.failedPivot, sym[k * n + k]);
  }
  for (let k = 0; k < n; k++) {
    const pivot = chol.lower[k * n + k] ** 2;
    if (pivot < RELATIVE_PIVOT_FLOOR * sym[k * n + k]) throw new NotPositiveDefiniteError(k, name(k), pivot, sym[k * n + k]);
  }
  const precision = inverseFromCholesky(chol.lower, n);
  const dev = inverseDeviation(precision, sym, n);
  if (!(dev.worst <= INVERSE_TOLERANCE)) {
    throw new RangeError(
      `covariance is numerically singular: precision·covariance deviates from the identity by ` +
        `${formatForPeople(dev.worst, 6)} at [${dev.i}][${dev.j}] (limit ${INVERSE_TOLERANCE}, scaled to unit variances); ` +
        `drop one of ${name(dev.i)} and ${name(dev.j)} or use the shrinkage estimator`,
    );
  }
  return {
    rows,
    mean: Array.from(mean),
    covariance: toRows(sym, n),
    precision: toRows(precision, n),
    logDet: logDetFromCholesky(chol.lower, n),
    details,
  };
}

// ---------------------------------------------------------------------------------------------
// Parsing and verification
// ---------------------------------------------------------------------------------------------

/**
 * Parses and verifies an artifact (an object, or its JSON text). Refuses, listing every problem:
 * invalid JSON; any schema violation or unknown key; more than {@link MAX_MODEL_COLUMNS} columns or
 * {@link MAX_SEGMENTS} segments; columns that are not the features' columns in order; a segment
 * whose mean / covariance / precision has the wrong size; a covariance or precision that is not
 * symmetric or not positive definite; precision·covariance ≉ I; a logDet that is not ln|Σ|; a
 * diagonal model with non-zero off-diagonals; a missing `*` segment; fallbacks that shadow
 * segments; a cutoff whose per-segment log-densities or tail probability disagree with its d²;
 * and a checksum that does not match the content.
 * @throws ArtifactError with `problems` as `{ path, rule }` (e.g. `segments.web.precision[2][3]`)
 * @example const artifact = await parseArtifact(JSON.parse(await file.text()));
 */
export async function parseArtifact(input: unknown): Promise<ModelArtifact> {
  let value = input;
  if (typeof value === "string") {
    try {
      value = JSON.parse(value);
    } catch (err) {
      throw new ArtifactError([{ path: "(artifact)", rule: `must be valid JSON: ${(err as Error).message}` }]);
    }
  }
  const early = precheck(value);
  if (early.length > 0) throw new ArtifactError(early);

  const parsed = modelArtifactSchema.safeParse(value);
  if (!parsed.success) throw new ArtifactError(parsed.error.issues.flatMap(issueToProblems));
  const artifact = parsed.data;

  const problems: ArtifactProblem[] = [];
  checkSemantics(artifact, problems);
  let expected: string | null = null;
  try {
    expected = await artifactChecksum(artifact);
  } catch (err) {
    problems.push({ path: "checksum", rule: `cannot be computed: ${(err as Error).message}` });
  }
  if (expected !== null && expected !== artifact.checksum) {
    problems.push({
      path: "checksum",
      rule: `must equal the SHA-256 of the canonical content (${expected}); the content was altered after sealing`,
    });
  }
  if (problems.length > 0) throw new ArtifactError(problems);
  return artifact;
}

/** Cheap checks on the raw input before zod walks it: object shape, size limits, reserved keys. */
function precheck(value: unknown): ArtifactProblem[] {
  if (typeof value !== "object" || value === null || Array.isArray(value)) {
    return [{ path: "(artifact)", rule: `must be a JSON object. Actual: ${describe(value)}` }];
  }
  const problems: ArtifactProblem[] = [];
  const root = value as Record<string, unknown>;
  for (const key of ["columns", "features"] as const) {
    const v = Object.hasOwn(root, key) ? root[key] : undefined;
    if (Array.isArray(v) && v.length > MAX_MODEL_COLUMNS) {
      problems.push({ path: key, rule: `at most ${MAX_MODEL_COLUMNS} model columns are allowed. Actual: ${v.length}` });
    }
  }
  const segs = Object.hasOwn(root, "segments") ? root.segments : undefined;
  if (typeof segs === "object" && segs !== null && !Array.isArray(segs)) {
    const count = Object.keys(segs).length;
    if (count > MAX_SEGMENTS) {
      problems.push({ path: "segments", rule: `at most ${MAX_SEGMENTS} segments are allowed. Actual: ${count}` });
    }
  }
  if (problems.length > 0) return problems;
  // zod drops a `__proto__` key silently; refuse it instead, wherever it hides.
  findReservedKeys(value, "", 0, problems);
  return problems;
}

const MAX_DEPTH = 16;

function findReservedKeys(value: unknown, path: string, depth: number, problems: ArtifactProblem[]): void {
  if (typeof value !== "object" || value === null) return;
  if (depth > MAX_DEPTH) {
    problems.push({ path: path || "(artifact)", rule: `is nested deeper than ${MAX_DEPTH} levels` });
    return;
  }
  if (Array.isArray(value)) {
    // Arrays of numbers are the bulk of an artifact; only arrays of objects can hide keys.
    for (let i = 0; i < value.length; i++) {
      const item: unknown = value[i];
      if (typeof item === "object" && item !== null) findReservedKeys(item, `${path}[${i}]`, depth + 1, problems);
    }
    return;
  }
  for (const key of Object.keys(value)) {
    const child = joinFieldPath(path, key);
    if (key === "__proto__") {
      problems.push({ path: child, rule: '"__proto__" is a reserved key and is not allowed' });
      continue;
    }
    findReservedKeys((value as Record<string, unknown>)[key], child, depth + 1, problems);
  }
}

function issueToProblems(issue: z.core.$ZodIssue): ArtifactProblem[] {
  const base = formatFieldPath(issue.path);
  if (issue.code === "unrecognized_keys") {
    return issue.keys.map((key) => ({
      path: joinFieldPath(base, key),
      rule: `is not a field of ${MODEL_FORMAT} (unknown keys are refused)`,
    }));
  }
  let rule = issue.message;
  const missing = /^Invalid input: expected (.+), received undefined$/.exec(rule);
  if (missing) rule = `is required (expected ${missing[1]})`;
  return [{ path: base || "(artifact)", rule }];
}

function checkSemantics(a: ModelArtifact, problems: ArtifactProblem[]): void {
  const add = (path: string, rule: string): void => {
    problems.push({ path, rule });
  };
  const n = a.columns.length;

  // The record spec, when the features derive from payment records.
  try {
    recordSpecFromArtifact(a);
  } catch (err) {
    if (!(err instanceof FeatureSpecError)) throw err;
    for (const p of err.problems) add(p.field, p.rule);
  }

  // Features and columns.
  const names = new Set<string>();
  const expectedColumns: string[] = [];
  a.features.forEach((f, i) => {
    if (names.has(f.name)) add(`features[${i}].name`, `must be unique; "${f.name}" appears twice`);
    names.add(f.name);
    const cols = columnsOf(f);
    if (!sameStrings(f.columns, cols)) {
      add(`features[${i}].columns`, `must be ${JSON.stringify(cols)} for a ${f.transform} feature. Actual: ${JSON.stringify(f.columns)}`);
    }
    if (f.transform === "yeo-johnson" && f.lambda === undefined) {
      add(`features[${i}].lambda`, "is required for the yeo-johnson transform");
    }
    if (f.observed !== undefined && !(f.observed.min <= f.observed.max)) {
      add(`features[${i}].observed`, `min must not exceed max; got min ${f.observed.min}, max ${f.observed.max}`);
    }
    if (f.transform !== "yeo-johnson" && f.lambda !== undefined) {
      add(`features[${i}].lambda`, `is only allowed for the yeo-johnson transform, not ${f.transform}`);
    }
    expectedColumns.push(...f.columns);
  });
  if (expectedColumns.length !== n) {
    add("columns", `must have one entry per feature column: expected ${expectedColumns.length}. Actual: ${n}`);
  } else if (!sameStrings(a.columns, expectedColumns)) {
    const at = a.columns.findIndex((c, i) => c !== expectedColumns[i]);
    add(`columns[${at}]`, `must be "${expectedColumns[at]}" (the features' columns in order). Actual: "${a.columns[at]}"`);
  }
  const seen = new Set<string>();
  a.columns.forEach((c, i) => {
    if (seen.has(c)) add(`columns[${i}]`, `must be unique; "${c}" appears twice`);
    seen.add(c);
  });

  // Segments.
  const keys = Object.keys(a.segments);
  if (!Object.hasOwn(a.segments, "*")) add(`segments["*"]`, 'the pooled segment "*" is required');
  if (a.segmentBy === null && keys.some((k) => k !== "*")) {
    add("segments", 'only the pooled segment "*" is allowed when segmentBy is null');
  }
  for (const key of keys) checkSegment(a, key, n, add);

  for (const key of Object.keys(a.segmentFallbacks)) {
    if (Object.hasOwn(a.segments, key) || key === "*") {
      add(joinFieldPath("segmentFallbacks", key), 'must not name a fitted segment: a value is either fitted or falls back to "*"');
    }
  }
  if (a.segmentBy === null && Object.keys(a.segmentFallbacks).length > 0) {
    add("segmentFallbacks", "must be empty when segmentBy is null");
  }

  // Cutoff: the three forms of the decision rule must agree.
  const c = a.cutoff;
  for (const key of keys) {
    if (!Object.hasOwn(c.logDensity, key)) {
      add(joinFieldPath("cutoff.logDensity", key), `is required: every segment needs its log-density cutoff`);
      continue;
    }
    const expected = logDensityAt(n, a.segments[key].logDet, c.mahalanobisSq);
    const actual = c.logDensity[key];
    if (!(Math.abs(actual - expected) <= 1e-9 * Math.max(1, Math.abs(expected)))) {
      add(joinFieldPath("cutoff.logDensity", key), `must equal −½(n ln 2π + logDet + cutoff.mahalanobisSq) = ${expected}. Actual: ${actual}`);
    }
  }
  for (const key of Object.keys(c.logDensity)) {
    if (!Object.hasOwn(a.segments, key)) add(joinFieldPath("cutoff.logDensity", key), "names no segment");
  }
  const tail = chiSquareSurvival(c.mahalanobisSq, n);
  // 1e-6 relative: far looser than the χ² routine's error, far tighter than any edited cutoff.
  if (!(Math.abs(c.tailProbability - tail) <= 1e-6 * Math.max(tail, c.tailProbability) + 1e-300)) {
    add("cutoff.tailProbability", `must equal P(χ²_${n} > cutoff.mahalanobisSq) = ${tail}. Actual: ${c.tailProbability}`);
  }
  if (c.basis === "flag-rate" && c.flagRate === null) {
    add("cutoff.flagRate", 'is required when basis is "flag-rate"');
  }

  // Reference edges for drift.
  if (a.reference.columnEdges.length !== n) {
    add("reference.columnEdges", `must have one edge list per model column (${n}). Actual: ${a.reference.columnEdges.length}`);
  }
  a.reference.columnEdges.forEach((edges, i) => {
    const at = firstDecrease(edges);
    if (at >= 0) add(`reference.columnEdges[${i}][${at}]`, `edges must be non-decreasing: ${edges[at]} < ${edges[at - 1]}`);
  });
  const at = firstDecrease(a.reference.scoreEdges);
  if (at >= 0) add(`reference.scoreEdges[${at}]`, "edges must be non-decreasing");
  const checkShares = (path: string, shares: readonly number[], edges: readonly number[] | undefined): void => {
    if (edges !== undefined && shares.length !== edges.length + 1) {
      add(path, `must have one share per bucket (edges + 1 = ${edges.length + 1}). Actual: ${shares.length}`);
    }
    const sum = shares.reduce((t, x) => t + x, 0);
    if (!(Math.abs(sum - 1) <= 1e-9)) add(path, `shares must sum to 1. Actual: ${sum}`);
  };
  if (a.reference.columnShares !== undefined) {
    if (a.reference.columnShares.length !== a.reference.columnEdges.length) {
      add("reference.columnShares", `must have one share list per edge list (${a.reference.columnEdges.length}). Actual: ${a.reference.columnShares.length}`);
    }
    a.reference.columnShares.forEach((shares, i) => checkShares(`reference.columnShares[${i}]`, shares, a.reference.columnEdges[i]));
  }
  if (a.reference.scoreShares !== undefined) checkShares("reference.scoreShares", a.reference.scoreShares, a.reference.scoreEdges);

  if (a.training.rowsUsed > a.training.rowsRead) {
    add("training.rowsUsed", `cannot exceed training.rowsRead (${a.training.rowsRead}). Actual: ${a.training.rowsUsed}`);
  }
}

function checkSegment(a: ModelArtifact, key: string, n: number, add: (path: string, rule: string) => void): void {
  const seg = a.segments[key];
  const base = joinFieldPath("segments", key);
  if (seg.tailLaw === "predictive" && seg.rows <= n) {
    add(`${base}.tailLaw`, `"predictive" needs more training rows than model columns (${n}). Actual rows: ${seg.rows}`);
  }
  if (seg.details.estimator !== a.estimator) {
    add(`${base}.details.estimator`, `must match the artifact's estimator "${a.estimator}". Actual: "${seg.details.estimator}"`);
  }
  let sized = true;
  if (seg.mean.length !== n) {
    add(`${base}.mean`, `must have n = ${n} entries. Actual: ${seg.mean.length}`);
    sized = false;
  }
  for (const which of ["covariance", "precision"] as const) {
    const m = seg[which];
    if (m.length !== n) {
      add(`${base}.${which}`, `must have n = ${n} rows. Actual: ${m.length}`);
      sized = false;
      continue;
    }
    m.forEach((row, i) => {
      if (row.length !== n) {
        add(`${base}.${which}[${i}]`, `must have n = ${n} entries. Actual: ${row.length}`);
        sized = false;
      }
    });
  }
  if (!sized) return;

  const cov = flatten(seg.covariance, n);
  const prec = flatten(seg.precision, n);
  const colName = (k: number): string => a.columns[k] ?? `column ${k}`;
  let symmetric = true;
  for (const [which, m] of [
    ["covariance", cov],
    ["precision", prec],
  ] as const) {
    const asym = worstAsymmetry(m, n);
    if (asym.relative > SYMMETRY_TOLERANCE) {
      symmetric = false;
      add(
        `${base}.${which}[${asym.i}][${asym.j}]`,
        `must equal ${which}[${asym.j}][${asym.i}] (symmetric): relative asymmetry ${formatForPeople(asym.relative, 6)} > ${SYMMETRY_TOLERANCE}`,
      );
    }
    if (a.covarianceShape === "diagonal") {
      let offenders = 0;
      let first = -1;
      for (let i = 0; i < n * n; i++) {
        if (Math.floor(i / n) !== i % n && m[i] !== 0) {
          offenders++;
          if (first < 0) first = i;
        }
      }
      if (offenders > 0) {
        add(`${base}.${which}[${Math.floor(first / n)}][${first % n}]`, `must be 0 in a diagonal model (${offenders} non-zero off-diagonal entries)`);
      }
    }
  }
  const covChol = cholesky(cov, n);
  const precChol = cholesky(prec, n);
  if (!covChol.ok) add(`${base}.covariance`, notPdRule(covChol, colName));
  if (!precChol.ok) add(`${base}.precision`, notPdRule(precChol, colName));
  if (covChol.ok) {
    const logDet = logDetFromCholesky(covChol.lower, n);
    if (!(Math.abs(seg.logDet - logDet) <= LOG_DET_TOLERANCE)) {
      add(`${base}.logDet`, `must equal ln|covariance| = ${logDet} (within ${LOG_DET_TOLERANCE}). Actual: ${seg.logDet}`);
    }
  }
  if (symmetric && covChol.ok && precChol.ok) {
    const dev = inverseDeviation(prec, cov, n);
    if (!(dev.worst <= INVERSE_TOLERANCE)) {
      add(
        `${base}.precision`,
        `precision·covariance must equal the identity: deviation ${formatForPeople(dev.worst, 6)} at [${dev.i}][${dev.j}] ` + `> ${INVERSE_TOLERANCE} (scaled to unit variances)`,
      );
    }
  }
}

function notPdRule(chol: CholeskyResult, colName: (k: number) => string): string {
  return `must be positive definite: the Cholesky pivot of ${colName(chol.failedAt)} (index ${chol.failedAt}) ` + `is ${formatForPeople(chol.failedPivot, 6)}, not > 0`;
}

// ---------------------------------------------------------------------------------------------
// Helpers
// ---------------------------------------------------------------------------------------------

/** Largest relative asymmetry of an n×n matrix and where it is (i > j). */
function worstAsymmetry(a: Float64Array, n: number): { relative: number; i: number; j: number } {
  let scale = 0;
  for (let k = 0; k < n * n; k++) scale = Math.max(scale, Math.abs(a[k]));
  let worst = 0;
  let wi = 0;
  let wj = 0;
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < i; j++) {
      const d = Math.abs(a[i * n + j] - a[j * n + i]);
      if (d > worst) {
        worst = d;
        wi = i;
        wj = j;
      }
    }
  }
  return { relative: scale === 0 ? 0 : worst / scale, i: wi, j: wj };
}

/**
 * max_ij |d_i (ΛΣ − I)_ij / d_j| with d_i = √Σ_ii (see {@link INVERSE_TOLERANCE}); NaN-safe:
 * a non-finite deviation is reported as Infinity.
 */
function inverseDeviation(precision: Float64Array, covariance: Float64Array, n: number): { worst: number; i: number; j: number } {
  let worst = 0;
  let wi = 0;
  let wj = 0;
  const scale = new Float64Array(n);
  for (let i = 0; i < n; i++) scale[i] = Math.sqrt(covariance[i * n + i]);
  const row = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    // Row i of Λ·Σ, accumulated row-wise so the inner loop scans memory in order.
    row.fill(0);
    for (let k = 0; k < n; k++) {
      const pik = precision[i * n + k];
      const base = k * n;
      for (let j = 0; j < n; j++) row[j] += pik * covariance[base + j];
    }
    for (let j = 0; j < n; j++) {
      const dev = Math.abs(((row[j] - (i === j ? 1 : 0)) * scale[i]) / scale[j]);
      const d = Number.isNaN(dev) ? Infinity : dev;
      if (d > worst) {
        worst = d;
        wi = i;
        wj = j;
      }
    }
  }
  return { worst, i: wi, j: wj };
}

function flatten(rows: readonly (readonly number[])[], n: number): Float64Array {
  const out = new Float64Array(n * n);
  for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) out[i * n + j] = rows[i][j];
  return out;
}

function firstDecrease(values: readonly number[]): number {
  for (let i = 1; i < values.length; i++) if (values[i] < values[i - 1]) return i;
  return -1;
}

function sameStrings(a: readonly string[], b: readonly string[]): boolean {
  return a.length === b.length && a.every((v, i) => v === b[i]);
}

function describe(value: unknown): string {
  if (value === null) return "null";
  if (Array.isArray(value)) return "an array";
  return `a ${typeof value}`;
}
