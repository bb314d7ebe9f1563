/**
 * Fit orchestration: streams a row source in a few passes and turns normal (non-fraud) traffic
 * into a sealed, verified model artifact, or refuses with diagnostics before anything is written.
 *
 * Passes over the source (each `source.pass()` restarts from the first row), one module each:
 * 1. read (`fit-read-pass.ts`) — validate, count rows per segment, sample raw rows for the
 *    Yeo–Johnson λ fits (`fit-transforms.ts`) and the drift reference edges.
 * 2. moments (`fit-moment-passes.ts`) — count, mean and co-moment per model; robust holds the rows.
 * 3. fourth-moments — shrinkage only.
 * 4. cutoff (`fit-cutoff-pass.ts`) — d² of every row under its own model, sampled.
 * Then estimation (`fit-estimate.ts`), and the artifact and its report (`fit-finish.ts`:
 * `fit-artifact.ts`, `fit-report.ts`). The models being fitted live in `fit-slots.ts`.
 *
 * Covariances are the estimators' own: classical and shrinkage divide by m (maximum likelihood);
 * robust is the reweighted FAST-MCD estimate. Pure TypeScript: no Node APIs, so the worker can refit.
 */
import type { ModelArtifact } from "./artifact";
import { FitRefusal, diagnoseRowCount } from "./diagnostics";
import { chooseShape } from "./estimators";
import { modelColumns } from "./features";
import { checkOptions, trainingCounts } from "./fit-checks";
import { cutoffPass } from "./fit-cutoff-pass";
import { finishFit } from "./fit-finish";
import { checkConstantColumns, estimateSlots, hasError } from "./fit-estimate";
import { fourthMomentsPass, momentsPass, type PassInput } from "./fit-moment-passes";
import { readPass } from "./fit-read-pass";
import { ModelSlots } from "./fit-slots";
import { columnDeciles, fitTransforms } from "./fit-transforms";
import { DEFAULT_FIT_SEED, defaultMinSegmentRows, type FitOptions, type FitReport, type RowSource } from "./fit-types";

export {
  CUTOFF_SAMPLE_ROWS,
  DEFAULT_FIT_SEED,
  FIT_SAMPLE_ROWS,
  FitInputError,
  defaultMinSegmentRows,
  type FitOptions,
  type FitReport,
  type FitRow,
  type RowSource,
} from "./fit-types";
export { contentVersion } from "./fit-artifact";
export { mcdSubsetSize } from "./fit-estimate";

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
  const columns = modelColumns(decls);
  const n = columns.length;
  const seed = options.seed ?? DEFAULT_FIT_SEED;
  const segmentBy = options.segmentBy;
  const minSegmentRows = options.minSegmentRows ?? defaultMinSegmentRows(n);
  const progress = options.onProgress ?? (() => {});
  const createdAt = options.createdAt ?? new Date().toISOString();

  const read = await readPass(source, decls, segmentBy, seed, progress);
  const { rowsUsed, segmentCounts } = read;
  const { shape, reason: shapeReason } = chooseShape(options.shape, rowsUsed, n);
  const pooledRowDiagnostics = diagnoseRowCount(rowsUsed, n, shape);
  if (hasError(pooledRowDiagnostics)) throw new FitRefusal(pooledRowDiagnostics);
  const slots = new ModelSlots({ rowsUsed, segmentCounts, n, shape, estimator: options.estimator, minSegmentRows, segmentBy }, pooledRowDiagnostics);

  const sample = read.sample.rows();
  const sampleRows = read.sample.size;
  const { features, warnings: transformWarnings } = fitTransforms(decls, sample, sampleRows, read.observedMin, read.observedMax);
  slots.warnings.push(...transformWarnings);

  const pass: PassInput = { source, decls, features, slots, rowsUsed, n, progress };
  await momentsPass(pass);
  checkConstantColumns(slots, columns);
  if (options.estimator === "shrinkage") await fourthMomentsPass(pass);
  estimateSlots(slots, { estimator: options.estimator, shape, columns, seed, supportFraction: options.supportFraction });
  const cutoffSample = await cutoffPass(pass, seed, options.estimator === "classical" && shape === "full");

  return finishFit({
    options,
    createdAt,
    features,
    columns,
    shape,
    shapeReason,
    minSegmentRows,
    slots,
    cutoffSample,
    columnReference: columnDeciles(sample, sampleRows, decls.length, features, n),
    training: { rowsUsed, ...trainingCounts(options, rowsUsed) },
    segmentCounts,
    seed,
  });
}
