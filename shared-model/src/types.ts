/**
 * Shared shapes of the model core. Every module of shared-model, the CLI, the worker and the UI
 * speak in these types; fitted values are kept apart from fit options.
 *
 * Vectors and matrices are row-major `Float64Array`s at run time and `number[]` in JSON.
 */
import type { TailLaw } from "./tail-law";

/** How a raw feature is mapped before the Gaussian is fitted. */
export type TransformKind = "none" | "log" | "log1p" | "yeo-johnson" | "cyclic-hour";

/** A feature as declared by the user (spec file or `--features`). */
export interface FeatureDeclaration {
  /** Column name in the ledger. */
  name: string;
  /** Transform applied before fitting and scoring. */
  transform: TransformKind;
}

/** A feature with its fitted transform parameters, as stored in the artifact. */
export interface FittedFeature extends FeatureDeclaration {
  /** Yeo–Johnson λ fitted by maximum likelihood (only for `yeo-johnson`). */
  lambda?: number;
  /**
   * Smallest and largest raw value seen in training. Explanations clip expected ranges to it, so
   * a count is never "expected −0.2" and an asymptote of the inverse transform never shows as ∞.
   */
  observed?: { min: number; max: number };
  /**
   * Names of the model columns this feature produces, in order: `[name]` for every transform but
   * `cyclic-hour`, which produces `[name + ".sin", name + ".cos"]`.
   */
  columns: string[];
}

/** Covariance estimator. `classical` is maximum likelihood (divides by m). */
export type EstimatorName = "classical" | "shrinkage" | "robust";

/** Covariance shape actually fitted. */
export type CovarianceShape = "full" | "diagonal";

/** Covariance shape requested; `auto` picks full only when rows ≥ 10 × columns. */
export type CovarianceShapeRequest = CovarianceShape | "auto";

/** What the estimator reports besides μ and Σ. */
export type EstimatorDetails =
  | { estimator: "classical"; denominator: "m" }
  | {
      estimator: "shrinkage";
      denominator: "m";
      /** Ledoit–Wolf intensity δ ∈ [0, 1]: Σ = (1−δ)·S + δ·(tr S / n)·I. */
      shrinkage: number;
      target: "scaled-identity";
    }
  | {
      estimator: "robust";
      /** Subset size h of the raw MCD (default ⌊(m+n+1)/2⌋). */
      h: number;
      /** ln det of the raw MCD covariance of the best h-subset (divided by h, before consistency). */
      rawLogDet: number;
      /** Consistency factor applied to the raw covariance. */
      consistencyFactor: number;
      /** Rows kept by the reweighting step. */
      reweightedRows: number;
      /** Seed that makes the fit reproducible. */
      seed: number;
    };

/** One diagnostic finding. `error` stops the fit; `warning` and `info` are reported. */
export interface Diagnostic {
  /** Stable machine-readable code, e.g. `too-few-rows`, `constant-column`, `linear-dependency`. */
  code: string;
  severity: "error" | "warning" | "info";
  /** Plain-language sentence with the numbers, e.g. "12 rows for 16 columns: …". */
  message: string;
  /** Columns involved, if any. */
  columns?: string[];
  /** For dependencies: the relation as an equation in column names, e.g. `total ≈ 1.00·subtotal + 1.00·shipping`. */
  equation?: string;
  /** What to do about it, naming the option to change. */
  remedy?: string;
}

/** One segment's fitted Gaussian, compiled for scoring (never re-parsed or re-inverted per call). */
export interface SegmentModel {
  /** Segment key; `*` is the pooled model. */
  key: string;
  /** Training rows behind this fit. */
  rows: number;
  /** Number of model columns. */
  n: number;
  mean: Float64Array;
  covariance: Float64Array;
  /** Σ⁻¹, row-major, exactly symmetric. */
  precision: Float64Array;
  /** ln |Σ| from the Cholesky factor. */
  logDet: number;
  /** −½ (n ln 2π + ln|Σ|): add −½ d² to get the log-density. */
  logNormalizer: number;
  /** The law its tail probabilities read (`tail-law.ts`); absent means χ². */
  tailLaw?: TailLaw;
}

/** Outcome of scoring one payment. */
export interface ScoreResult {
  /** Natural-log density of the transformed feature vector under the segment's Gaussian. */
  logDensity: number;
  /** Squared Mahalanobis distance d² = (x−μ)ᵀ Σ⁻¹ (x−μ). */
  mahalanobisSq: number;
  /**
   * P(D > d²) under the segment's tail law: P(χ²ₙ > d²), or for a small segment whose cutoff read the
   * predictive law, P(n(m + 1)/(m − n)·F(n, m − n) > d²) (`tail-law.ts`). Calibrated for new payments.
   */
  tailProbability: number;
  /**
   * log₁₀ of `tailProbability`, from the log of the incomplete gamma (or beta) function: finite where
   * `tailProbability` underflows to 0 (below about 1e-323), so sorts and "how rare" read it.
   */
  log10TailProbability: number;
  /** True when d² exceeds the cutoff (equivalently logDensity is below the segment's cutoff). */
  flagged: boolean;
  /** Segment key whose model scored it (`*` when pooled). */
  segment: string;
}

/** Why a payment scored as it did, for one feature, in the feature's own units. */
export interface Reason {
  feature: string;
  /** The raw value received. */
  actual: number;
  /**
   * Expected value and central 95 % range given all the other features, in raw units.
   * `outsideTraining` says the whole range lies below or above every raw value seen in training
   * (then `low`, `center` and `high` are all clipped to that end, and the range says nothing more).
   */
  expected: { center: number; low: number; high: number; outsideTraining?: "below" | "above" };
  /**
   * Standardized conditional residual (x_j − E[x_j | rest]) / sd(x_j | rest) in model units;
   * for a cyclic pair, the non-negative root of the pair's conditional d².
   */
  standardizedResidual: number;
}
