/**
 * Fitting past one machine: the ledger is split into k shards, each shard's moments (count, mean,
 * co-moment matrix) are accumulated on its own — as k machines would — shipped as JSON, and merged
 * exactly (Chan, Golub & LeVeque 1979, "Updating formulae and a pairwise algorithm for computing
 * sample variances"). The merged mean and covariance equal a single pass over the whole ledger up to
 * floating-point round-off.
 *
 * The feature transforms are fitted ONCE, up front, on the pooled sample, and every shard applies
 * the same fitted transforms. That is required, not a convenience: a Yeo–Johnson λ (Yeo & Johnson
 * 2000) maximises a likelihood over the whole sample, so λ fitted per shard differs from shard to
 * shard, the shards' transformed values live on different scales, and no merge of their moments
 * can give the pooled answer. {@link naivePerShardTransforms} shows the size of that error.
 */
import { fitFeatures, MomentAccumulator, transformInto, modelColumns, type FeatureDeclaration, type FittedFeature, type MomentSnapshot } from "../shared-model/src";

/** Mean and covariance (denominator m − 1) of one way of computing them. */
export interface MomentSummary {
  count: number;
  mean: Float64Array;
  /** n×n row-major, denominator m − 1. */
  covariance: Float64Array;
}

/** Result of {@link shardAndMerge}. */
export interface ShardFitResult {
  shards: number;
  rows: number;
  rowsPerShard: number[];
  columns: string[];
  features: FittedFeature[];
  single: MomentSummary;
  merged: MomentSummary;
  /** Bytes of the k JSON snapshots shipped to the merger. */
  snapshotBytes: number;
  /** max_i |μ̂ᵢ − μᵢ| / max(|μᵢ|, √Σᵢᵢ) (mean error in units of the column's spread when μᵢ ≈ 0). */
  meanRelativeError: number;
  /** max_ij |Σ̂ᵢⱼ − Σᵢⱼ| / √(Σᵢᵢ Σⱼⱼ) (relative to the entry's natural scale; off-diagonals may be ≈ 0). */
  covarianceRelativeError: number;
}

/**
 * Fits the transforms on all rows, then compares one pass over every row with k contiguous shards
 * accumulated apart, round-tripped through JSON and merged.
 *
 * @param rows raw feature rows (one value per declared feature, in declaration order)
 * @param shards k, an integer from 1 to rows.length
 * @throws {Error} when k is out of range
 * @example shardAndMerge(rows, spec.features, 4).covarianceRelativeError // ≈ 1e-15
 */
export function shardAndMerge(rows: readonly Float64Array[], decls: readonly FeatureDeclaration[], shards: number): ShardFitResult {
  if (!Number.isInteger(shards) || shards < 1 || shards > rows.length) throw new Error(`shards must be an integer from 1 to ${rows.length} (the row count). Actual: ${shards}`);
  const features = pooledTransforms(rows, decls);
  const columns = modelColumns(decls);
  const n = columns.length;
  const x = new Float64Array(n);

  const single = new MomentAccumulator(n);
  for (const row of rows) {
    transformInto(features, row, x);
    single.push(x);
  }

  // Contiguous shards, as a ledger partitioned by time or by file would be.
  const snapshots: string[] = [];
  const rowsPerShard: number[] = [];
  for (let s = 0; s < shards; s++) {
    const from = Math.floor((s * rows.length) / shards);
    const to = Math.floor(((s + 1) * rows.length) / shards);
    const acc = new MomentAccumulator(n);
    for (let r = from; r < to; r++) {
      transformInto(features, rows[r], x);
      acc.push(x);
    }
    rowsPerShard.push(to - from);
    snapshots.push(JSON.stringify(acc.toJSON()));
  }
  const merged = new MomentAccumulator(n);
  for (const text of snapshots) merged.merge(MomentAccumulator.fromJSON(JSON.parse(text) as MomentSnapshot));

  const a = summary(single);
  const b = summary(merged);
  return {
    shards,
    rows: rows.length,
    rowsPerShard,
    columns,
    features,
    single: a,
    merged: b,
    snapshotBytes: snapshots.reduce((sum, t) => sum + t.length, 0),
    ...relativeErrors(a, b),
  };
}

/**
 * The mistake the up-front transform fit avoids: each shard fits its own transforms (its own
 * Yeo–Johnson λ), accumulates, and the shards are merged. Returns its errors against the pooled
 * single pass, for the docs and for the test that shows the difference is real.
 */
export function naivePerShardTransforms(
  rows: readonly Float64Array[],
  decls: readonly FeatureDeclaration[],
  shards: number,
): { meanRelativeError: number; covarianceRelativeError: number; lambdas: (number | undefined)[][] } {
  const reference = shardAndMerge(rows, decls, 1).single;
  const n = modelColumns(decls).length;
  const x = new Float64Array(n);
  const merged = new MomentAccumulator(n);
  const lambdas: (number | undefined)[][] = [];
  for (let s = 0; s < shards; s++) {
    const part = rows.slice(Math.floor((s * rows.length) / shards), Math.floor(((s + 1) * rows.length) / shards));
    const features = pooledTransforms(part, decls);
    lambdas.push(features.map((f) => f.lambda));
    const acc = new MomentAccumulator(n);
    for (const row of part) {
      transformInto(features, row, x);
      acc.push(x);
    }
    merged.merge(acc);
  }
  return { ...relativeErrors(reference, summary(merged)), lambdas };
}

/** Transforms fitted on every row (the pooled sample). */
function pooledTransforms(rows: readonly Float64Array[], decls: readonly FeatureDeclaration[]): FittedFeature[] {
  return fitFeatures(decls, (j) => Float64Array.from(rows, (r) => r[j]));
}

function summary(acc: MomentAccumulator): MomentSummary {
  return { count: acc.count, mean: Float64Array.from(acc.mean), covariance: acc.covariance("m-1") };
}

/**
 * Worst relative differences of mean and covariance, each entry against its natural scale: |μᵢ| or
 * the column's standard deviation for the mean, √(Σᵢᵢ Σⱼⱼ) for covariances (off-diagonal entries
 * may be near zero).
 */
export function relativeErrors(reference: MomentSummary, other: MomentSummary): { meanRelativeError: number; covarianceRelativeError: number } {
  const n = reference.mean.length;
  let meanRelativeError = 0;
  let covarianceRelativeError = 0;
  for (let i = 0; i < n; i++) {
    const spread = Math.sqrt(reference.covariance[i * n + i]);
    meanRelativeError = Math.max(meanRelativeError, Math.abs(other.mean[i] - reference.mean[i]) / Math.max(Math.abs(reference.mean[i]), spread));
    for (let j = 0; j < n; j++) {
      const scale = Math.sqrt(reference.covariance[i * n + i] * reference.covariance[j * n + j]);
      covarianceRelativeError = Math.max(covarianceRelativeError, Math.abs(other.covariance[i * n + j] - reference.covariance[i * n + j]) / scale);
    }
  }
  return { meanRelativeError, covarianceRelativeError };
}
