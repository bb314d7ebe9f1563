/**
 * Finishing a fit whose heavy part ran elsewhere: the moments of every row per segment come from
 * a SQL engine (`momentsQuery`), a uniform sample of raw rows from a sampled query
 * (`sampleQuery`). From these isodense does the small remaining part: estimation and its
 * diagnostics, the cutoff and the drift reference from the sample's d², the sealed artifact.
 *
 * Exact from the moments: the mean and the classical covariance (the same numbers a streaming fit
 * of the same rows gives, up to round-off). From the sample, and said so in the report: the
 * shrinkage intensity's fourth moments (scaled to the segment's rows), the robust FAST-MCD
 * estimate, the cutoff quantile and the decile edges. Below {@link FIT_SAMPLE_ROWS} rows the
 * sample is every row and all of it is exact.
 */
import type { ModelArtifact } from "./artifact";
import { FitRefusal, diagnoseRowCount } from "./diagnostics";
import { chooseShape, FourthMomentAccumulator } from "./estimators";
import { columnsOf, modelColumns, transformInto } from "./features";
import { checkOptions, checkRow } from "./fit-checks";
import { CutoffSampler } from "./fit-cutoff-pass";
import { finishFit } from "./fit-finish";
import { checkConstantColumns, estimateSlots, hasError } from "./fit-estimate";
import { countSegment } from "./fit-read-pass";
import { formatCount as count } from "./format-count";
import { ModelSlots, segmentKey } from "./fit-slots";
import { columnDeciles, powerAtBound } from "./fit-transforms";
import { DEFAULT_FIT_SEED, FitInputError, defaultMinSegmentRows, type FitOptions, type FitReport, type FitRow } from "./fit-types";
import type { MomentAccumulator } from "./moments";
import { POOLED_SEGMENT } from "./sql-moments";
import type { FittedFeature } from "./types";

/** What the moments query returned, read into numbers (see `readMomentsTable`). */
export interface MomentsResult {
  /** Moments of the model columns per segment value; `*` is the pooled model and must be there. */
  moments: Map<string, MomentAccumulator>;
  /** Smallest and largest raw value per feature over the rows used. */
  observedMin: number[];
  observedMax: number[];
  /** λ per feature as the query used it (`undefined` for features without a parameter). */
  lambdas: (number | undefined)[];
  /** Rows left out as labelled fraud. */
  fraudRows: number;
}

/** A uniform sample of the rows used (fraud left out), raw values in feature order. */
export interface RowSample {
  rows: FitRow[];
}

/**
 * Fits the model from moments computed elsewhere and a sample of rows.
 * @param options as for `fitModel`; `rowsRead` and `rowsExcludedAsFraud` default to the result's counts
 * @param origin how the report says where the moments came from, e.g. "from SQL"
 * @throws FitRefusal with every diagnostic when the data cannot support the model
 * @throws FitInputError when the result or the sample do not fit the options (columns, segments, λ)
 * @example const { artifact } = await fitFromMoments(result, { rows: sampleRows }, options);
 */
export async function fitFromMoments(result: MomentsResult, sample: RowSample, options: FitOptions, origin = "from SQL"): Promise<{ artifact: ModelArtifact; report: FitReport }> {
  checkOptions(options);
  const decls = options.features;
  const columns = modelColumns(decls);
  const n = columns.length;
  const seed = options.seed ?? DEFAULT_FIT_SEED;
  const segmentBy = options.segmentBy;
  const minSegmentRows = options.minSegmentRows ?? defaultMinSegmentRows(n);
  const createdAt = options.createdAt ?? new Date().toISOString();

  const pooledMoments = result.moments.get(POOLED_SEGMENT);
  if (pooledMoments === undefined) throw new FitInputError("moments", `the result has no pooled row (segment '${POOLED_SEGMENT}')`);
  for (const [key, m] of result.moments) {
    if (m.n !== n) throw new FitInputError("moments", `segment '${key}' has ${m.n} model columns; the features give ${n} (${columns.join(", ")})`);
  }
  const rowsUsed = pooledMoments.count;
  const segmentCounts = new Map<string, number>();
  for (const [key, m] of result.moments) {
    if (key === POOLED_SEGMENT) continue;
    if (segmentBy === null) throw new FitInputError("moments", `the result has segment '${key}' but the fit has no segment column`);
    countSegment(segmentCounts, key, segmentBy, 0);
    segmentCounts.set(key, m.count);
  }

  const features = fittedFeatures(decls, result);
  if (sample.rows.length === 0) throw new FitInputError("sample", "holds no rows; the cutoff and the drift edges need a sample of the rows used");
  if (sample.rows.length > rowsUsed) {
    throw new FitInputError("sample", `holds ${sample.rows.length} rows, more than the ${rowsUsed} rows the moments were computed from`);
  }
  const sampleCounts = new Map<string, number>([[POOLED_SEGMENT, sample.rows.length]]);
  sample.rows.forEach((row, r) => {
    checkRow(row, decls, r + 1);
    const key = segmentKey(row, segmentBy);
    if (key !== null) sampleCounts.set(key, (sampleCounts.get(key) ?? 0) + 1);
  });

  const { shape, reason: shapeReason } = chooseShape(options.shape, rowsUsed, n);
  const pooledRowDiagnostics = diagnoseRowCount(rowsUsed, n, shape);
  if (hasError(pooledRowDiagnostics)) throw new FitRefusal(pooledRowDiagnostics);
  const slots = new ModelSlots(
    {
      rowsUsed,
      segmentCounts,
      n,
      shape,
      estimator: options.estimator,
      minSegmentRows,
      segmentBy,
      robustRows: (key) => sampleCounts.get(key) ?? 0,
    },
    pooledRowDiagnostics,
  );
  slots.warnings.push(...powerAtBound(features));
  for (const slot of slots.all) slot.moments = result.moments.get(slot.key)!;
  checkConstantColumns(slots, columns);

  // The sample feeds what needs rows: robust data, shrinkage's fourth moments.
  const transformed = new Float64Array(sample.rows.length * n);
  for (const slot of slots.live()) if (options.estimator === "shrinkage") slot.fourth = new FourthMomentAccumulator(slot.moments.mean);
  sample.rows.forEach((row, r) => {
    const x = transformed.subarray(r * n, r * n + n);
    transformInto(features, row.values, x);
    for (const slot of slots.feeding(row, r + 1)) {
      slot.fourth?.push(x);
      if (slot.data !== null && slot.filled * n < slot.data.length) {
        slot.data.set(x, slot.filled * n);
        slot.filled++;
      }
    }
  });
  for (const slot of slots.live()) {
    // Σ‖x − x̄‖⁴ over all rows, estimated as rows × its sample mean (exact when the sample is every row).
    if (slot.fourth !== null) slot.fourth.sum *= slot.rows / Math.max(1, sampleCounts.get(slot.key) ?? 0);
  }
  estimateSlots(slots, { estimator: options.estimator, shape, columns, seed, supportFraction: options.supportFraction });

  // Deleted distances as the streaming fit keeps them: classical full-covariance fits only.
  const sampler = new CutoffSampler(n, seed, options.estimator === "classical" && shape === "full");
  sample.rows.forEach((row, r) => sampler.offer(slots.scoring(row), transformed.subarray(r * n, r * n + n)));
  const cutoffSample = sampler.result();

  const raw = new Float64Array(sample.rows.length * decls.length);
  sample.rows.forEach((row, r) => raw.set(row.values, r * decls.length));
  const rowsExcludedAsFraud = options.rowsExcludedAsFraud ?? result.fraudRows;
  const rowsRead = options.rowsRead ?? rowsUsed + rowsExcludedAsFraud;
  const exact = sample.rows.length === rowsUsed;
  const robustNote = exact
    ? undefined
    : options.estimator === "robust"
      ? `robust estimate from a sample: FAST-MCD ran on ${count(sample.rows.length)} sampled rows (moments from all ${count(rowsUsed)}); past one machine the robust estimator works on a sampled query`
      : options.estimator === "shrinkage"
        ? `shrinkage intensity from a sample: fourth moments of ${count(sample.rows.length)} sampled rows, scaled to all ${count(rowsUsed)}`
        : undefined;
  const { artifact, report } = await finishFit({
    options: { ...options, rowsRead, rowsExcludedAsFraud },
    createdAt,
    features,
    columns,
    shape,
    shapeReason,
    minSegmentRows,
    slots,
    cutoffSample,
    columnReference: columnDeciles(raw, sample.rows.length, decls.length, features, n),
    training: { rowsUsed, rowsRead, rowsExcludedAsFraud },
    segmentCounts,
    seed,
    robustNote,
  });
  report.lines.splice(
    1,
    0,
    `moments of all ${count(rowsUsed)} rows ${origin}; cutoff and drift edges from ${exact ? "every row" : `a sample of ${count(sample.rows.length)} rows`}`,
  );
  return { artifact, report };
}

/** The features with the parameters the moments were computed with, and the observed raw ranges. */
function fittedFeatures(decls: FitOptions["features"], result: MomentsResult): FittedFeature[] {
  return decls.map((decl, j) => {
    const feature: FittedFeature = { name: decl.name, transform: decl.transform, columns: columnsOf(decl) };
    const lambda = result.lambdas[j];
    if (decl.transform === "yeo-johnson") {
      if (lambda === undefined || !Number.isFinite(lambda)) {
        throw new FitInputError(decl.name, "is a yeo-johnson feature but the moments result carries no λ for it; write the query with isodense sql moments");
      }
      feature.lambda = lambda;
    }
    const min = result.observedMin[j];
    const max = result.observedMax[j];
    if (!(Number.isFinite(min) && Number.isFinite(max) && min <= max)) {
      throw new FitInputError(decl.name, `the moments result gives no finite raw range (min ${min}, max ${max})`);
    }
    feature.observed = { min, max };
    return feature;
  });
}
