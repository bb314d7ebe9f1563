/**
 * The fit's public shapes: the rows it reads, its options, its report, its input error, and the
 * sizes of its samples. Kept apart from the passes so every pass module can import them.
 */
import { InputError } from "./input-error";
import type { RecordSpec } from "./records/spec";
import type { CovarianceShape, CovarianceShapeRequest, Diagnostic, EstimatorName, FeatureDeclaration } from "./types";

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
  /** Model id; by default derived from the content (see `fitModel`). */
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
  /**
   * The record spec the rows were derived with (same features, same order): the artifact carries
   * its `record` and each feature's derivation, so the edge derives exactly as the fit did.
   */
  recordSpec?: RecordSpec;
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
export class FitInputError extends InputError {
  readonly row: number | null;
  constructor(field: string, rule: string, row: number | null = null) {
    super(field, rule, row === null ? `${field}: ${rule}` : `row ${row}, ${field}: ${rule}`);
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
export const PROGRESS_EVERY = 8192;

/** Default rows a segment needs for its own model: 10 per model column (common practice), at least 200. */
export function defaultMinSegmentRows(n: number): number {
  return Math.max(10 * n, 200);
}
