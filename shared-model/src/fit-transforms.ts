/**
 * The transforms' fitted parameters from a sample of raw rows: Yeo–Johnson λ per feature, and
 * each feature's observed raw range; a warning for every power that ended on its search range.
 */
import { fitFeatures, transformInto, YEO_JOHNSON_LAMBDA_RANGE } from "./features";
import { decileReference, type DecileReference } from "./drift";
import type { Diagnostic, FeatureDeclaration, FittedFeature } from "./types";

/**
 * Fits the features on `sampleRows` raw rows (row-major, one value per declaration).
 * @returns the fitted features (with `observed` ranges) and `power-at-bound` warnings
 * @throws RangeError naming a Yeo–Johnson feature whose sample cannot be fitted
 */
export function fitTransforms(
  decls: readonly FeatureDeclaration[],
  sample: Float64Array,
  sampleRows: number,
  observedMin: ArrayLike<number>,
  observedMax: ArrayLike<number>,
): { features: FittedFeature[]; warnings: Diagnostic[] } {
  const k = decls.length;
  const features = fitFeatures(decls, (j) => {
    const column = new Float64Array(sampleRows);
    for (let r = 0; r < sampleRows; r++) column[r] = sample[r * k + j];
    return column;
  }).map((f, j) => ({ ...f, observed: { min: observedMin[j], max: observedMax[j] } }));
  return { features, warnings: powerAtBound(features) };
}

/** True when a declaration has a parameter that must be fitted on data (Yeo–Johnson λ). */
export function needsFittedParameters(decls: readonly FeatureDeclaration[]): boolean {
  return decls.some((d) => d.transform === "yeo-johnson");
}

/**
 * Drift reference of every model column: the nine inner deciles of the transformed sample and the
 * sample's share in each bucket.
 * @param sample raw rows, row-major, `k` values each
 */
export function columnDeciles(sample: Float64Array, rows: number, k: number, features: FittedFeature[], n: number): DecileReference[] {
  // Column-major, written as each row is transformed: one contiguous run per column to select in.
  const byColumn = new Float64Array(rows * n);
  const x = new Float64Array(n);
  for (let r = 0; r < rows; r++) {
    transformInto(features, sample.subarray(r * k, r * k + k), x);
    for (let c = 0; c < n; c++) byColumn[c * rows + r] = x[c];
  }
  const references: DecileReference[] = [];
  for (let c = 0; c < n; c++) references.push(decileReference(byColumn.subarray(c * rows, (c + 1) * rows)));
  return references;
}

/**
 * A Yeo–Johnson power that ended on an end of its search range: the likelihood kept improving
 * past it, which happens when a feature is far from any power-normal shape (a spike at one value
 * with a thin tail, say). The fit still works, but the transformed column is poorly Gaussian, so
 * its contribution to d² and its expected ranges in the explanations deserve less trust.
 */
/** `power-at-bound` warnings: Yeo–Johnson powers that ended on their search range. */
export function powerAtBound(features: readonly FittedFeature[]): Diagnostic[] {
  const [low, high] = YEO_JOHNSON_LAMBDA_RANGE;
  return (
    features
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
      }))
  );
}
