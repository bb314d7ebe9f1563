/**
 * Fit orchestration: streams a row source in a few passes and turns normal (non-fraud) traffic
 * into a sealed, verified model artifact, or refuses with diagnostics before anything is written.
 *
 * Passes over the source (each `source.pass()` restarts from the first row):
 * 1. read — validate every raw value, count rows per segment, keep a seeded reservoir sample of
 *    raw rows (Vitter 1985, "Random sampling with a reservoir", ACM TOMS 11(1):37–57, Algorithm R)
 *    for the Yeo–Johnson λ fits and the drift reference edges.
 * 2. moments — transform each row and accumulate count, mean and co-moment per segment and pooled
 *    (Welford 1962; memory O(n²) per model, flat in the number of rows). The robust estimator also
 *    holds the transformed rows of each model here: FAST-MCD needs the data, O(m·n) memory.
 * 3. fourth-moments — shrinkage only: Σ‖x − x̄‖⁴ around the pass-2 mean (Ledoit & Wolf 2004).
 * 4. cutoff — score every row under its own model and keep a bounded reservoir of d² values; the
 *    cutoff is the empirical upper quantile for the requested flag rate.
 *
 * Covariances are the estimators' own: classical and shrinkage divide by m (maximum likelihood);
 * robust is the reweighted FAST-MCD estimate. Pure TypeScript: no Node APIs, so the worker can refit.
 */
import {
  ArtifactError,
  MAX_SEGMENTS,
  buildSegment,
  canonicalJson,
  parseArtifact,
  sealArtifact,
  sha256Hex,
  type ArtifactSegment,
  type ModelArtifact,
  type UnsealedArtifact,
} from "./artifact";
import { cutoffForFlagRate } from "./cutoff";
import { FitRefusal, diagnoseColumns, diagnoseCovariance, diagnoseRowCount } from "./diagnostics";
import {
  FourthMomentAccumulator,
  chooseShape,
  classicalEstimate,
  shrinkageEstimate,
  toDiagonal,
  type CovarianceEstimate,
} from "./estimators";
import { checkRawValue, fitFeatures, modelColumns, transformInto, YEO_JOHNSON_LAMBDA_RANGE } from "./features";
import { fromRows } from "./linalg";
import { ExactFitError, robustEstimate } from "./mcd";
import { MomentAccumulator } from "./moments";
import { createRandom, type RandomSource } from "./random";
import { mahalanobisSq } from "./score";
import type {
  CovarianceShape,
  CovarianceShapeRequest,
  Diagnostic,
  EstimatorName,
  FeatureDeclaration,
  FittedFeature,
} from "./types";

/** One training row as the fit reads it. */
export interface FitRow {
  /**
   * Raw values in feature order (before any transform). Read only while the row is current: the
   * fit copies what it keeps, so a source may reuse one buffer.
   */
  values: Float64Array;
  /** Segment value, or `null` for a row that only feeds the pooled model. */
  segment: string | null;
}

/**
 * Re-iterable training rows: every call to `pass()` restarts from the first row and yields the
 * same rows in the same order. Rows labelled fraud are already left out by the caller.
 */
export interface RowSource {
  pass(): AsyncIterable<FitRow>;
}

/** What to fit and how. */
export interface FitOptions {
  /** Features in the order of `FitRow.values`. */
  features: FeatureDeclaration[];
  /** Covariance shape; `auto` picks full only when rows ≥ 10 × model columns (common practice). */
  shape: CovarianceShapeRequest;
  estimator: EstimatorName;
  /** Name of the segment column, or `null` for one pooled model. */
  segmentBy: string | null;
  /** Rows a segment value needs for its own model; default max(10·n, 200) for n model columns. */
  minSegmentRows?: number;
  /** Share of training rows the cutoff flags, 0 < rate < 1 (e.g. 0.01). */
  cutoffRate: number;
  /** Seed of every random choice (samples, FAST-MCD starts); default {@link DEFAULT_FIT_SEED}. */
  seed?: number;
  /**
   * Robust only: the least share of rows the raw MCD keeps, 0.5 ≤ α ≤ 1 (scikit-learn's
   * `support_fraction`, robustbase's `alpha`). h = max(⌊(m+n+1)/2⌋, ⌈α·m⌉): the default ⌊(m+n+1)/2⌋
   * has the highest breakdown point; a larger α tolerates less contamination but copes with a
   * column that takes one value in most rows (a count that is usually 0).
   */
  supportFraction?: number;
  /** Model id; by default derived from the content (see {@link fitModel}). */
  version?: string;
  /** ISO-8601 time stamp; default now. */
  createdAt?: string;
  /** Where the rows came from (file name, query), stored in the artifact. */
  source?: string | null;
  /**
   * Rows read before fraud was left out, and rows left out as fraud. Both are read after the last
   * pass, so a source that counts while it streams may supply them through getters.
   * Defaults: rows used + rows excluded, and 0.
   */
  rowsRead?: number;
  rowsExcludedAsFraud?: number;
  /** Called every few thousand rows and at the end of each pass (`read`, `moments`, `fourth-moments`, `cutoff`). */
  onProgress?: (pass: string, rows: number) => void;
}

/** The human-readable outcome of a fit. */
export interface FitReport {
  /** Lines for people: rows, shape and why, estimator, segments, conditioning, warnings, cutoff. */
  lines: string[];
  /** Warnings and notes (errors never reach a report: they refuse the fit). */
  diagnostics: Diagnostic[];
  shape: CovarianceShape;
  shapeReason: string;
  rowsUsed: number;
  /** `*` first, then fitted segments, then values that fell back to `*` with the reason. */
  segments: { key: string; rows: number; fallback?: string }[];
  /** Condition number of the pooled covariance (largest / smallest eigenvalue). */
  conditionNumber: number;
}

/** A bad option or a bad row, named by field and rule; `row` is the 1-based row of the source. */
export class FitInputError extends Error {
  readonly field: string;
  readonly rule: string;
  readonly row: number | null;
  constructor(field: string, rule: string, row: number | null = null) {
    super(row === null ? `${field}: ${rule}` : `row ${row}, ${field}: ${rule}`);
    this.name = "FitInputError";
    this.field = field;
    this.rule = rule;
    this.row = row;
  }
}

/** Seed used when the options give none, so two fits of the same rows agree. */
export const DEFAULT_FIT_SEED = 1;
/** Raw rows kept for Yeo–Johnson λ and drift edges; below it the sample is the whole data. */
export const FIT_SAMPLE_ROWS = 100_000;
/** d² values kept for the cutoff quantile and the score edges. */
export const CUTOFF_SAMPLE_ROWS = 200_000;
/** Rows between progress calls. */
const PROGRESS_EVERY = 8192;
/** Probabilities of the decile edges stored for drift: the nine inner cut points. */
const DECILES = [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9];
const LN_2PI = Math.log(2 * Math.PI);

/** Default rows a segment needs for its own model: 10 per model column (common practice), at least 200. */
export function defaultMinSegmentRows(n: number): number {
  return Math.max(10 * n, 200);
}

/** One model being fitted: the pooled `*` or a segment value with enough rows. */
interface ModelSlot {
  key: string;
  rows: number;
  moments: MomentAccumulator;
  /** Transformed rows (robust only), m×n row-major. */
  data: Float64Array | null;
  filled: number;
  fourth: FourthMomentAccumulator | null;
  estimate: CovarianceEstimate | null;
  conditionNumber: number;
  segment: ArtifactSegment | null;
  precision: Float64Array | null;
  mean: Float64Array | null;
}

/**
 * Fits the model described by `options` to the rows of `source`.
 *
 * Segments: with `segmentBy` set, every value with at least `minSegmentRows` rows gets its own
 * model; the others are scored by the pooled `*` model and listed in `segmentFallbacks` with the
 * reason. A segment whose own fit fails a diagnostic also falls back (with a warning); the pooled
 * model failing one refuses the whole fit.
 *
 * Version: `options.version`, or `m<yyyymmdd>-<8 hex>` where the hex is the start of the SHA-256
 * of the canonical JSON of the artifact content without `version` and `checksum` (the date is the
 * UTC date of `createdAt`). The id thus names the content; the checksum then seals id and content.
 *
 * @returns the sealed artifact (already verified with `parseArtifact`) and a report for people
 * @throws FitRefusal with every diagnostic when the data cannot support the model (too few rows,
 *   constant columns, linear dependencies, a covariance that is not positive definite)
 * @throws FitInputError naming the option or the row and feature at fault
 * @example
 * const { artifact, report } = await fitModel(source, {
 *   features: [{ name: "amount", transform: "log" }, { name: "items", transform: "log1p" }],
 *   shape: "auto", estimator: "classical", segmentBy: null, cutoffRate: 0.01,
 * });
 */
export async function fitModel(source: RowSource, options: FitOptions): Promise<{ artifact: ModelArtifact; report: FitReport }> {
  checkOptions(options);
  const decls = options.features;
  const k = decls.length;
  const columns = modelColumns(decls);
  const n = columns.length;
  const seed = options.seed ?? DEFAULT_FIT_SEED;
  const segmentBy = options.segmentBy;
  const minSegmentRows = options.minSegmentRows ?? defaultMinSegmentRows(n);
  const progress = options.onProgress ?? (() => {});
  const createdAt = options.createdAt ?? new Date().toISOString();

  // ---- Pass 1: validate, count, sample. ----
  const sampleRandom = createRandom(seed);
  const reservoir = new Reservoir(k, FIT_SAMPLE_ROWS, sampleRandom);
  const segmentCounts = new Map<string, number>();
  const observedMin = new Float64Array(k).fill(Infinity);
  const observedMax = new Float64Array(k).fill(-Infinity);
  let rowsUsed = 0;
  for await (const row of source.pass()) {
    rowsUsed++;
    checkRow(row, decls, rowsUsed);
    for (let j = 0; j < k; j++) {
      const v = row.values[j];
      if (v < observedMin[j]) observedMin[j] = v;
      if (v > observedMax[j]) observedMax[j] = v;
    }
    const key = segmentKey(row, segmentBy);
    if (key !== null) {
      if (key === "*") throw new FitInputError("segment", `'*' is reserved for the pooled model and cannot be a ${segmentBy} value`, rowsUsed);
      const before = segmentCounts.get(key);
      if (before === undefined && segmentCounts.size >= MAX_SEGMENTS - 1) {
        throw new FitInputError(
          "segmentBy",
          `'${segmentBy}' has more than ${MAX_SEGMENTS - 1} distinct values; segment by a categorical column with few values`,
          rowsUsed,
        );
      }
      segmentCounts.set(key, (before ?? 0) + 1);
    }
    reservoir.offer(row.values);
    if (rowsUsed % PROGRESS_EVERY === 0) progress("read", rowsUsed);
  }
  progress("read", rowsUsed);

  const { shape, reason: shapeReason } = chooseShape(options.shape, rowsUsed, n);
  const pooledRowDiagnostics = diagnoseRowCount(rowsUsed, n, shape);
  if (hasError(pooledRowDiagnostics)) throw new FitRefusal(pooledRowDiagnostics);

  // Segment values: fitted when they have enough rows (and pass their own row-count check).
  const warnings: Diagnostic[] = [...pooledRowDiagnostics];
  const fallbacks = new Map<string, string>();
  const slots: ModelSlot[] = [newSlot("*", rowsUsed, n, options.estimator)];
  for (const key of [...segmentCounts.keys()].sort()) {
    const rows = segmentCounts.get(key)!;
    if (rows < minSegmentRows) {
      fallbacks.set(key, `${rows} rows < ${minSegmentRows} required`);
      continue;
    }
    const rowDiagnostics = diagnoseRowCount(rows, n, shape);
    if (hasError(rowDiagnostics)) {
      fallbacks.set(key, firstError(rowDiagnostics));
      continue;
    }
    slots.push(newSlot(key, rows, n, options.estimator));
  }
  const slotByKey = new Map(slots.map((s) => [s.key, s]));

  // ---- Transforms from the sample. ----
  const sample = reservoir.rows();
  const sampleRows = reservoir.size;
  const features: FittedFeature[] = fitFeatures(decls, (j) => {
    const column = new Float64Array(sampleRows);
    for (let r = 0; r < sampleRows; r++) column[r] = sample[r * k + j];
    return column;
  }).map((f, j) => ({ ...f, observed: { min: observedMin[j], max: observedMax[j] } }));
  warnings.push(...powerAtBound(features));

  // ---- Pass 2: moments (and the rows themselves for robust). ----
  const x = new Float64Array(n);
  let seen = 0;
  for await (const row of source.pass()) {
    seen++;
    checkRow(row, decls, seen);
    transformInto(features, row.values, x);
    for (const slot of slotsOf(row, slots[0], slotByKey, segmentBy, seen, rowsUsed)) {
      slot.moments.push(x);
      if (slot.data !== null) {
        slot.data.set(x, slot.filled * n);
        slot.filled++;
      }
    }
    if (seen % PROGRESS_EVERY === 0) progress("moments", seen);
  }
  progress("moments", seen);
  checkSameRows("moments", seen, rowsUsed);

  // Constant columns refuse the pooled fit and send a segment back to the pooled model.
  const pooled = slots[0];
  const columnDiagnostics = diagnoseColumns(pooled.moments, columns);
  if (hasError(columnDiagnostics)) throw new FitRefusal([...warnings, ...columnDiagnostics]);
  warnings.push(...columnDiagnostics);
  for (const slot of slots.slice(1)) {
    const own = diagnoseColumns(slot.moments, columns);
    if (hasError(own)) demote(slot, firstError(own));
  }

  // ---- Pass 3 (shrinkage): Σ‖x − x̄‖⁴ around each model's mean. ----
  if (options.estimator === "shrinkage") {
    for (const slot of liveSlots()) slot.fourth = new FourthMomentAccumulator(slot.moments.mean);
    seen = 0;
    for await (const row of source.pass()) {
      seen++;
      checkRow(row, decls, seen);
      transformInto(features, row.values, x);
      for (const slot of slotsOf(row, pooled, slotByKey, segmentBy, seen, rowsUsed)) slot.fourth?.push(x);
      if (seen % PROGRESS_EVERY === 0) progress("fourth-moments", seen);
    }
    progress("fourth-moments", seen);
    checkSameRows("fourth-moments", seen, rowsUsed);
  }

  // ---- Estimates, diagnostics and segments. ----
  for (const slot of liveSlots()) {
    const problems: Diagnostic[] = [];
    try {
      let estimate = estimateFor(slot, options.estimator, n, seed, options.supportFraction);
      // Dependencies are sought in the full estimate even for a diagonal model, where they are
      // warnings (the same evidence counted twice) rather than errors.
      const conditioning = diagnoseCovariance(estimate.covariance, n, columns, { mean: estimate.mean, shape, rows: slot.rows });
      if (shape === "diagonal") {
        estimate = toDiagonal(estimate);
        slot.conditionNumber = diagonalConditionNumber(estimate.covariance, n);
        problems.push(...conditioning.diagnostics.filter((d) => d.code !== "condition-number"));
      } else {
        slot.conditionNumber = conditioning.conditionNumber;
        problems.push(...conditioning.diagnostics);
      }
      if (!hasError(problems)) {
        slot.segment = buildSegment(estimate.mean, estimate.covariance, n, slot.rows, estimate.details, columns);
        slot.estimate = estimate;
      }
    } catch (error) {
      if (error instanceof FitRefusal) throw error;
      if (error instanceof ExactFitError) {
        problems.push(exactFitDiagnostic(error, slot, columns, mcdSubsetSize(slot.rows, n, options.supportFraction)));
      } else problems.push({
        code: "estimate-failed",
        severity: "error",
        message: `the ${options.estimator} covariance of ${slot.key === "*" ? "the pooled model" : `segment '${slot.key}'`} cannot be used: ${(error as Error).message}`,
        remedy: "drop one of the columns named, or fit with the shrinkage estimator (--estimator shrinkage), which is always well conditioned",
      });
    }
    if (slot.key === "*") {
      if (hasError(problems)) throw new FitRefusal([...warnings, ...problems]);
      warnings.push(...problems);
    } else if (hasError(problems)) {
      demote(slot, firstError(problems));
    } else {
      warnings.push(...problems.map((d) => inSegment(d, slot.key)));
    }
    // The rows are no longer needed; let them go before the cutoff pass.
    slot.data = null;
  }
  for (const slot of liveSlots()) {
    slot.precision = fromRows(slot.segment!.precision);
    slot.mean = Float64Array.from(slot.segment!.mean);
  }

  // ---- Pass 4: d² of every training row under its own model; cutoff and reference edges. ----
  const scoreRandom = createRandom(seed + 1);
  const scoreReservoir = new Reservoir(1, CUTOFF_SAMPLE_ROWS, scoreRandom);
  const diff = new Float64Array(n);
  const d2 = new Float64Array(1);
  seen = 0;
  for await (const row of source.pass()) {
    seen++;
    checkRow(row, decls, seen);
    transformInto(features, row.values, x);
    const key = segmentKey(row, segmentBy);
    const own = key === null ? undefined : slotByKey.get(key);
    const model = own !== undefined && !fallbacks.has(own.key) ? own : pooled;
    d2[0] = mahalanobisSq(model.precision!, model.mean!, x, n, diff);
    scoreReservoir.offer(d2);
    if (seen % PROGRESS_EVERY === 0) progress("cutoff", seen);
  }
  progress("cutoff", seen);
  checkSameRows("cutoff", seen, rowsUsed);

  const scoreSample = scoreReservoir.rows();
  const cut = cutoffForFlagRate(scoreSample, options.cutoffRate, n);
  const fitted = liveSlots();
  const logDensity: Record<string, number> = {};
  const segments: Record<string, ArtifactSegment> = {};
  for (const slot of fitted) {
    segments[slot.key] = slot.segment!;
    logDensity[slot.key] = -0.5 * (n * LN_2PI + slot.segment!.logDet + cut.mahalanobisSq);
  }
  const segmentFallbacks: Record<string, string> = {};
  for (const key of [...fallbacks.keys()].sort()) segmentFallbacks[key] = fallbacks.get(key)!;

  const columnEdges = columnDeciles(sample, sampleRows, k, features, n);
  const scoreEdges = deciles(scoreSample);

  const rowsExcludedAsFraud = options.rowsExcludedAsFraud ?? 0;
  const rowsRead = options.rowsRead ?? rowsUsed + rowsExcludedAsFraud;
  if (!(Number.isSafeInteger(rowsExcludedAsFraud) && rowsExcludedAsFraud >= 0)) {
    throw new FitInputError("rowsExcludedAsFraud", `must be a whole number ≥ 0; got ${String(rowsExcludedAsFraud)}`);
  }
  if (!(Number.isSafeInteger(rowsRead) && rowsRead >= rowsUsed + rowsExcludedAsFraud)) {
    throw new FitInputError(
      "rowsRead",
      `must be a whole number ≥ rows used + rows excluded as fraud (${rowsUsed + rowsExcludedAsFraud}); got ${String(rowsRead)}`,
    );
  }
  const diagnostics = warnings.filter((d) => d.severity !== "error");
  const content: Omit<UnsealedArtifact, "version"> = {
    format: "isodense.model/v1",
    createdAt,
    features,
    columns,
    covarianceShape: shape,
    shapeReason,
    estimator: options.estimator,
    segmentBy,
    minSegmentRows,
    segments,
    segmentFallbacks,
    cutoff: {
      mahalanobisSq: cut.mahalanobisSq,
      tailProbability: cut.tailProbability,
      logDensity,
      basis: "flag-rate",
      flagRate: cut.flagRate,
    },
    training: { rowsRead, rowsUsed, rowsExcludedAsFraud, source: options.source ?? null },
    diagnostics,
    reference: { columnEdges, scoreEdges },
  };
  const version = options.version ?? (await contentVersion(content, createdAt));
  const artifact = await sealArtifact({ ...content, version });
  try {
    await parseArtifact(artifact);
  } catch (error) {
    // A fit that cannot be loaded back is a defect in the fit, not in the data.
    if (error instanceof ArtifactError) throw new Error(`internal error: the fitted artifact does not verify: ${error.message}`);
    throw error;
  }

  const report: FitReport = {
    lines: reportLines({ options, rowsRead, rowsUsed, rowsExcludedAsFraud, shape, shapeReason, fitted, fallbacks, segmentCounts, warnings: diagnostics, cut, logDensity, n, minSegmentRows, seed }),
    diagnostics,
    shape,
    shapeReason,
    rowsUsed,
    segments: [
      ...fitted.map((s) => ({ key: s.key, rows: s.rows })),
      ...[...fallbacks.keys()].sort().map((key) => ({ key, rows: segmentCounts.get(key) ?? 0, fallback: fallbacks.get(key)! })),
    ],
    conditionNumber: pooled.conditionNumber,
  };
  return { artifact, report };

  function liveSlots(): ModelSlot[] {
    return slots.filter((s) => !fallbacks.has(s.key));
  }

  function demote(slot: ModelSlot, reason: string): void {
    fallbacks.set(slot.key, reason);
    warnings.push({
      code: "segment-fallback",
      severity: "warning",
      message: `segment '${slot.key}' (${slot.rows} rows) is scored by the pooled model: ${reason}`,
      remedy: "check the segment's data, or raise --min-segment-rows to pool small segments",
    });
    slot.data = null;
    slot.fourth = null;
  }
}

function checkOptions(options: FitOptions): void {
  if (!Array.isArray(options.features) || options.features.length === 0) {
    throw new FitInputError("features", "must list at least one feature");
  }
  const names = new Set<string>();
  for (const f of options.features) {
    if (names.has(f.name)) throw new FitInputError("features", `'${f.name}' is listed twice; list each feature once`);
    names.add(f.name);
  }
  if (!["full", "diagonal", "auto"].includes(options.shape)) {
    throw new FitInputError("shape", `must be full, diagonal or auto; got '${String(options.shape)}'`);
  }
  if (!["classical", "shrinkage", "robust"].includes(options.estimator)) {
    throw new FitInputError("estimator", `must be classical, shrinkage or robust; got '${String(options.estimator)}'`);
  }
  if (!(typeof options.cutoffRate === "number" && options.cutoffRate > 0 && options.cutoffRate < 1)) {
    throw new FitInputError("cutoffRate", `must be a number with 0 < rate < 1; got ${String(options.cutoffRate)}`);
  }
  if (options.supportFraction !== undefined && !(options.supportFraction >= 0.5 && options.supportFraction <= 1)) {
    throw new FitInputError("supportFraction", `must be between 0.5 and 1; got ${String(options.supportFraction)}`);
  }
  if (options.supportFraction !== undefined && options.estimator !== "robust") {
    throw new FitInputError("supportFraction", `applies to the robust estimator only; the estimator is '${options.estimator}'`);
  }
  if (options.seed !== undefined && !(Number.isSafeInteger(options.seed) && options.seed >= 0 && options.seed < Number.MAX_SAFE_INTEGER)) {
    throw new FitInputError("seed", `must be a whole number ≥ 0; got ${String(options.seed)}`);
  }
  if (options.minSegmentRows !== undefined && !(Number.isSafeInteger(options.minSegmentRows) && options.minSegmentRows >= 1)) {
    throw new FitInputError("minSegmentRows", `must be a whole number ≥ 1; got ${String(options.minSegmentRows)}`);
  }
  if (options.segmentBy !== null && !(typeof options.segmentBy === "string" && options.segmentBy !== "")) {
    throw new FitInputError("segmentBy", "must be a column name or null");
  }
  if (options.createdAt !== undefined && !/^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}(\.\d+)?(Z|[+-]\d{2}:\d{2})$/.test(options.createdAt)) {
    throw new FitInputError("createdAt", `must be an ISO-8601 date-time such as 2026-12-01T09:30:00Z; got '${options.createdAt}'`);
  }
  if (options.version !== undefined && !(typeof options.version === "string" && options.version.length > 0 && options.version.length <= 200)) {
    throw new FitInputError("version", "must be a non-empty string of at most 200 characters");
  }
}

function checkRow(row: FitRow, decls: readonly FeatureDeclaration[], rowNumber: number): void {
  if (row.values.length !== decls.length) {
    throw new FitInputError("values", `must hold one raw value per feature (${decls.length}); got ${row.values.length}`, rowNumber);
  }
  for (let j = 0; j < decls.length; j++) {
    const problem = checkRawValue(decls[j], row.values[j]);
    if (problem !== null) throw new FitInputError(decls[j].name, problem, rowNumber);
  }
}

function checkSameRows(pass: string, seen: number, expected: number): void {
  if (seen !== expected) {
    throw new FitInputError(
      "source",
      `pass '${pass}' yielded ${seen} rows but the first pass yielded ${expected}; every pass must restart from the first row and yield the same rows`,
    );
  }
}

function newSlot(key: string, rows: number, n: number, estimator: EstimatorName): ModelSlot {
  return {
    key,
    rows,
    moments: new MomentAccumulator(n),
    // Robust holds the data: m·n doubles per model (FAST-MCD works on the rows themselves).
    data: estimator === "robust" ? new Float64Array(rows * n) : null,
    filled: 0,
    fourth: null,
    estimate: null,
    conditionNumber: Number.NaN,
    segment: null,
    precision: null,
    mean: null,
  };
}

/** The models a row feeds: always the pooled one, plus its own segment when that is fitted. */
function slotsOf(
  row: FitRow,
  pooled: ModelSlot,
  slotByKey: Map<string, ModelSlot>,
  segmentBy: string | null,
  rowNumber: number,
  expectedRows: number,
): ModelSlot[] {
  if (rowNumber > expectedRows) {
    throw new FitInputError("source", `a later pass yielded more rows than the first pass (${expectedRows}); every pass must yield the same rows`);
  }
  const key = segmentKey(row, segmentBy);
  if (key === null) return [pooled];
  const own = slotByKey.get(key);
  return own === undefined || own === pooled ? [pooled] : [pooled, own];
}

/** The segment a row belongs to; an empty value counts as none (pooled only). */
function segmentKey(row: FitRow, segmentBy: string | null): string | null {
  return segmentBy === null || row.segment === null || row.segment === "" ? null : row.segment;
}

/** MCD subset size for `rows` rows: the default ⌊(m+n+1)/2⌋, raised to ⌈α·m⌉ when a support fraction is given. */
export function mcdSubsetSize(rows: number, n: number, supportFraction?: number): number {
  const breakdown = Math.floor((rows + n + 1) / 2);
  return Math.min(rows, supportFraction === undefined ? breakdown : Math.max(breakdown, Math.ceil(supportFraction * rows)));
}

function estimateFor(slot: ModelSlot, estimator: EstimatorName, n: number, seed: number, supportFraction?: number): CovarianceEstimate {
  switch (estimator) {
    case "classical":
      return classicalEstimate(slot.moments);
    case "shrinkage":
      return shrinkageEstimate(slot.moments, slot.fourth!.sum);
    case "robust":
      return robustEstimate(slot.data!, slot.rows, n, { seed, h: mcdSubsetSize(slot.rows, n, supportFraction) });
  }
}

/**
 * A uniform random sample of at most `capacity` rows of `width` values from a stream of unknown
 * length (Algorithm R: row t, 0-based, replaces a random slot with probability capacity/(t+1)).
 * Storage grows by doubling, so a small source never pays for the full capacity.
 */
class Reservoir {
  private data: Float64Array;
  /** Rows offered so far. */
  private seen = 0;
  /** Rows held (min(seen, capacity)). */
  size = 0;

  constructor(
    private readonly width: number,
    private readonly capacity: number,
    private readonly random: RandomSource,
  ) {
    this.data = new Float64Array(Math.min(capacity, 1024) * width);
  }

  offer(values: ArrayLike<number>): void {
    const t = this.seen++;
    let slot = t;
    if (t >= this.capacity) {
      slot = Math.floor(this.random.next() * (t + 1));
      if (slot >= this.capacity) return;
    } else {
      if ((t + 1) * this.width > this.data.length) {
        const grown = new Float64Array(Math.min(this.capacity, 2 * (this.data.length / this.width)) * this.width);
        grown.set(this.data);
        this.data = grown;
      }
      this.size = t + 1;
    }
    const w = this.width;
    for (let j = 0; j < w; j++) this.data[slot * w + j] = values[j];
  }

  /** The sampled rows, row-major (`size` rows of `width` values). */
  rows(): Float64Array {
    return this.data.subarray(0, this.size * this.width);
  }
}

/** Type-7 quantiles (linear interpolation; Hyndman & Fan 1996, R's default) at the deciles. */
function deciles(values: Float64Array): number[] {
  const sorted = Float64Array.from(values).sort();
  const m = sorted.length;
  return DECILES.map((p) => {
    const h = (m - 1) * p;
    const lo = Math.floor(h);
    const hi = Math.min(lo + 1, m - 1);
    return sorted[lo] + (h - lo) * (sorted[hi] - sorted[lo]);
  });
}

function columnDeciles(sample: Float64Array, rows: number, k: number, features: FittedFeature[], n: number): number[][] {
  const transformed = new Float64Array(rows * n);
  const x = new Float64Array(n);
  for (let r = 0; r < rows; r++) {
    transformInto(features, sample.subarray(r * k, r * k + k), x);
    transformed.set(x, r * n);
  }
  const edges: number[][] = [];
  const column = new Float64Array(rows);
  for (let c = 0; c < n; c++) {
    for (let r = 0; r < rows; r++) column[r] = transformed[r * n + c];
    edges.push(deciles(column));
  }
  return edges;
}

/**
 * The model id derived from the content: `m<yyyymmdd>-<8 hex>`, where the hex is the start of the
 * SHA-256 of {@link canonicalJson} of the artifact content without `version` and `checksum`, and
 * the date is the UTC date of `createdAt`. Shared by the fit and by cutoff retuning
 * (`retuneArtifact`), so every artifact version in the project is named the same way.
 * @param content every field of the artifact but `version` (and `checksum`)
 * @param createdAt ISO-8601 date-time whose UTC date goes into the id
 * @throws TypeError when the content holds a non-finite number or a non-JSON value
 * @example await contentVersion(content, "2026-12-01T09:30:00Z") // "m20261201-3fa94c0e"
 */
export async function contentVersion(content: Omit<UnsealedArtifact, "version">, createdAt: string): Promise<string> {
  const hash = await sha256Hex(canonicalJson(content));
  const day = new Date(createdAt).toISOString().slice(0, 10).replace(/-/g, "");
  return `m${day}-${hash.slice(0, 8)}`;
}

/**
 * Names the hyperplane of a FAST-MCD exact fit in column names: typically a count that is 0 in
 * most rows (more than the h rows the raw MCD keeps), so the robust covariance would be singular.
 */
function exactFitDiagnostic(error: ExactFitError, slot: ModelSlot, columns: readonly string[], h: number): Diagnostic {
  const terms = error.normal
    .map((c, j) => ({ c, name: columns[j] }))
    .filter((t) => Math.abs(t.c) >= 0.005)
    .sort((a, b) => Math.abs(b.c) - Math.abs(a.c));
  const lead = terms[0];
  // Solve normal·x = offset for the leading column: lead = Σ k_j·col_j + c.
  const others = terms.slice(1).map((t) => ({ k: -t.c / lead.c, name: t.name }));
  const constant = error.offset / lead.c;
  let right = others.map((t, i) => `${t.k < 0 ? (i === 0 ? "−" : "− ") : i === 0 ? "" : "+ "}${Math.abs(t.k).toFixed(2)}·${t.name}`).join(" ");
  if (right === "") right = String(Number(constant.toPrecision(4)));
  else if (Math.abs(constant) >= 0.005) right += ` ${constant < 0 ? "−" : "+"} ${Math.abs(constant).toFixed(2)}`;
  const equation = `${lead.name} = ${right}`;
  const where = slot.key === "*" ? "" : ` of segment '${slot.key}'`;
  return {
    code: "robust-exact-fit",
    severity: "error",
    message:
      `${count(error.rowsOnHyperplane)} of ${count(slot.rows)} rows${where} satisfy ${equation} exactly (in model units), ` +
      `more than the ${count(h)} rows the robust fit keeps, so its covariance would be singular`,
    columns: terms.map((t) => t.name),
    equation,
    remedy:
      `drop ${terms.length === 1 ? lead.name : `one of ${terms.map((t) => t.name).join(", ")}`}, ` +
      `or raise --support-fraction above ${(error.rowsOnHyperplane / slot.rows).toFixed(2)} so the robust fit keeps more rows, ` +
      `or use --estimator shrinkage or classical, which use every row`,
  };
}

/** Largest over smallest variance: the condition number of a diagonal covariance. */
function diagonalConditionNumber(covariance: Float64Array, n: number): number {
  let lo = Infinity;
  let hi = 0;
  for (let i = 0; i < n; i++) {
    lo = Math.min(lo, covariance[i * n + i]);
    hi = Math.max(hi, covariance[i * n + i]);
  }
  return lo > 0 ? hi / lo : Infinity;
}

/**
 * A Yeo–Johnson power that ended on an end of its search range: the likelihood kept improving
 * past it, which happens when a feature is far from any power-normal shape (a spike at one value
 * with a thin tail, say). The fit still works, but the transformed column is poorly Gaussian, so
 * its contribution to d² and its expected ranges in the explanations deserve less trust.
 */
function powerAtBound(features: readonly FittedFeature[]): Diagnostic[] {
  const [low, high] = YEO_JOHNSON_LAMBDA_RANGE;
  return features
    // Brent's search may stop a hair inside the end; 1e-6 is far below any power that matters.
    .filter((f) => f.transform === "yeo-johnson" && f.lambda !== undefined && (f.lambda <= low + 1e-6 || f.lambda >= high - 1e-6))
    .map((f) => ({
      code: "power-at-bound",
      severity: "warning" as const,
      message:
        `the Yeo–Johnson power of ${f.name} reached the end of its range (λ = ${f.lambda}, range ${low} to ${high}): ` +
        `no power transform makes it look Gaussian, so its part of the score and its expected ranges are less reliable`,
      columns: [...f.columns],
      remedy: `declare another transform for ${f.name} in the spec (none or log1p), or split it into an indicator and an amount`,
    }));
}

function hasError(diagnostics: readonly Diagnostic[]): boolean {
  return diagnostics.some((d) => d.severity === "error");
}

function firstError(diagnostics: readonly Diagnostic[]): string {
  return diagnostics.find((d) => d.severity === "error")!.message;
}

function inSegment(d: Diagnostic, key: string): Diagnostic {
  return { ...d, message: `segment '${key}': ${d.message}` };
}

// ---------------------------------------------------------------------------------------------
// Report
// ---------------------------------------------------------------------------------------------

interface ReportInput {
  options: FitOptions;
  rowsRead: number;
  rowsUsed: number;
  rowsExcludedAsFraud: number;
  shape: CovarianceShape;
  shapeReason: string;
  fitted: ModelSlot[];
  fallbacks: Map<string, string>;
  segmentCounts: Map<string, number>;
  warnings: Diagnostic[];
  cut: { mahalanobisSq: number; tailProbability: number; flagRate: number };
  logDensity: Record<string, number>;
  n: number;
  minSegmentRows: number;
  seed: number;
}

function reportLines(r: ReportInput): string[] {
  const lines: string[] = [];
  const source = r.options.source ? ` from ${r.options.source}` : "";
  lines.push(
    `rows: ${count(r.rowsRead)} read${source}, ${count(r.rowsUsed)} used, ${count(r.rowsExcludedAsFraud)} excluded as labelled fraud`,
  );
  lines.push(`covariance: ${r.shape} (${r.shapeReason})`);
  lines.push(`estimator: ${estimatorLine(r.options.estimator, r.fitted[0], r.seed)}`);
  if (r.options.segmentBy !== null) {
    lines.push(`segments by '${r.options.segmentBy}' (own model from ${count(r.minSegmentRows)} rows):`);
    for (const slot of r.fitted.slice(1)) {
      lines.push(`  ${slot.key}: ${count(slot.rows)} rows, ${estimatorBrief(slot)}, condition number ${num(slot.conditionNumber)}`);
    }
    for (const key of [...r.fallbacks.keys()].sort()) {
      lines.push(`  ${key}: ${count(r.segmentCounts.get(key) ?? 0)} rows → pooled model (${r.fallbacks.get(key)})`);
    }
    if (r.segmentCounts.size === 0) lines.push(`  (no row has a value in '${r.options.segmentBy}'; every row is pooled)`);
  }
  lines.push(`condition number of the pooled covariance: ${num(r.fitted[0].conditionNumber)}`);
  for (const d of r.warnings) {
    if (d.severity === "info") continue;
    lines.push(`${d.severity}: ${d.message}${d.remedy ? ` — ${d.remedy}` : ""}`);
  }
  lines.push(
    `cutoff: flag when d² > ${num(r.cut.mahalanobisSq)} (tail probability P(χ²${r.n} > d²) < ${num(r.cut.tailProbability)}); ` +
      `flags ${pct(r.cut.flagRate)} of training rows (asked ${pct(r.options.cutoffRate)})`,
  );
  lines.push(
    `log-density cutoff per segment: ${Object.entries(r.logDensity)
      .map(([key, value]) => `${key} ${num(value)}`)
      .join(", ")}`,
  );
  return lines;
}

function estimatorLine(estimator: EstimatorName, pooled: ModelSlot, seed: number): string {
  const details = pooled.estimate?.details;
  if (details?.estimator === "shrinkage") {
    return `shrinkage (Ledoit–Wolf toward (tr S/n)·I, divides by m), pooled δ = ${num(details.shrinkage)}`;
  }
  if (details?.estimator === "robust") {
    return (
      `robust (FAST-MCD, seed ${details.seed ?? seed}): h = ${count(details.h)} of ${count(pooled.rows)} rows, ` +
      `${count(details.reweightedRows)} rows kept after reweighting`
    );
  }
  return `${estimator} (maximum likelihood, divides by m)`;
}

function estimatorBrief(slot: ModelSlot): string {
  const details = slot.estimate?.details;
  if (details?.estimator === "shrinkage") return `δ = ${num(details.shrinkage)}`;
  if (details?.estimator === "robust") return `h = ${count(details.h)}, ${count(details.reweightedRows)} rows kept`;
  return "classical";
}

function count(value: number): string {
  return String(Math.trunc(value)).replace(/\B(?=(\d{3})+(?!\d))/g, ",");
}

function num(value: number): string {
  if (!Number.isFinite(value)) return String(value);
  const magnitude = Math.abs(value);
  if (magnitude !== 0 && (magnitude < 1e-3 || magnitude >= 1e6)) return value.toExponential(3);
  return String(Number(value.toPrecision(4)));
}

function pct(fraction: number): string {
  return `${(fraction * 100).toFixed(2)} %`;
}
