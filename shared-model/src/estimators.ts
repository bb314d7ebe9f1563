/**
 * Covariance estimators over streamed moments: classical (maximum likelihood, divides by m),
 * Ledoit–Wolf shrinkage toward a scaled identity, the diagonal (independent-feature) reduction,
 * and the choice between full and diagonal shapes.
 *
 * Ledoit & Wolf (2004), "A well-conditioned estimator for large-dimensional covariance matrices",
 * J. Multivariate Analysis 88(2):365–411. With S the covariance divided by m, x̃_k = x_k − x̄ the
 * centred rows, μ = tr(S)/n and F = μ·I:
 *   δ̄² = ‖S − μI‖²_F                                   (dispersion of S around the target)
 *   β̄² = (1/m²)·Σ_k ‖x̃_k x̃_kᵀ − S‖²_F = (1/m²)·(Σ_k ‖x̃_k‖⁴ − m‖S‖²_F)   (noise in S)
 *   δ  = min(β̄², δ̄²) / δ̄²  ∈ [0, 1]                    (0 when β̄² = 0)
 *   Σ  = (1 − δ)·S + δ·μ·I
 * This is the computation of scikit-learn's `ledoit_wolf_shrinkage` (sklearn/covariance/
 * _shrunk_covariance.py), which divides both β̄² and δ̄² by n_features — a common factor that
 * cancels in the ratio. The second equality holds because Σ_k x̃_k x̃_kᵀ = m·S; it turns β̄² into
 * one scalar, Σ‖x̃_k‖⁴, which a second pass over the rows with the final mean accumulates
 * ({@link FourthMomentAccumulator}).
 */
import type { CovarianceShape, CovarianceShapeRequest, EstimatorDetails } from "./types";
import { countOf, formatCount } from "./format-count";
import { checkRowBlock, EstimationInputError, MomentAccumulator } from "./moments";

/** A fitted location and scatter. Covariance n×n row-major; `rows` is the m behind it. */
export interface CovarianceEstimate {
  /** Mean, length n. */
  mean: Float64Array;
  /** Covariance, n×n row-major (denominator stated in `details`). */
  covariance: Float64Array;
  /** Number of columns. */
  n: number;
  /** Rows the estimate was computed from. */
  rows: number;
  /** Estimator name and its own figures (shrinkage intensity, …). */
  details: EstimatorDetails;
}

function requireRows(acc: MomentAccumulator): void {
  if (acc.count < 1) {
    throw new EstimationInputError("acc.count", "must be ≥ 1: an estimate needs at least one row", "≥ 1", acc.count);
  }
}

/**
 * Maximum-likelihood estimate: the accumulator's mean and its co-moment divided by m (not m−1).
 * @throws {EstimationInputError} when the accumulator holds no rows
 * @example classicalEstimate(acc).covariance // acc.covariance("m")
 */
export function classicalEstimate(acc: MomentAccumulator): CovarianceEstimate {
  requireRows(acc);
  return {
    mean: Float64Array.from(acc.mean),
    covariance: acc.covariance("m"),
    n: acc.n,
    rows: acc.count,
    details: { estimator: "classical", denominator: "m" },
  };
}

/**
 * Second-pass accumulator of Σ‖x − μ‖⁴ around a fixed mean μ (the final mean of the first pass),
 * the one data-dependent quantity Ledoit–Wolf needs beyond the covariance. Shards merge by addition.
 *
 * @example
 * const fourth = new FourthMomentAccumulator(acc.mean);
 * for (const x of rows) fourth.push(x);
 * shrinkageEstimate(acc, fourth.sum);
 */
export class FourthMomentAccumulator {
  /** Number of columns. */
  readonly n: number;
  /** The fixed centre μ (a copy of what the constructor received). */
  readonly mean: Float64Array;
  /** Rows accumulated. */
  count = 0;
  /** Σ ‖x − μ‖⁴ over the rows pushed (squared Euclidean norm, squared again). */
  sum = 0;

  /**
   * @param mean the centre, normally the first pass's final mean (copied)
   * @throws {EstimationInputError} when the mean is empty or holds a non-finite value
   */
  constructor(mean: Float64Array) {
    if (!(mean instanceof Float64Array) || mean.length < 1) {
      throw new EstimationInputError("mean", "must be a Float64Array with at least one column", "length ≥ 1", mean?.length);
    }
    for (let i = 0; i < mean.length; i++) {
      if (!Number.isFinite(mean[i])) throw new EstimationInputError(`mean[${i}]`, "must be a finite number", "a finite number", mean[i]);
    }
    this.n = mean.length;
    this.mean = Float64Array.from(mean);
  }

  /**
   * Adds ‖x − μ‖⁴ for one row. No allocation.
   * @throws {EstimationInputError} on a wrong length or a non-finite value; the sum is unchanged
   */
  push(x: ArrayLike<number>): void {
    if (x.length !== this.n) throw new EstimationInputError("x", "must have one value per column", this.n, x.length);
    this.pushAt(x, 0, -1);
  }

  /**
   * Adds m rows stored row-major in `rows` (length m·n).
   * @throws {EstimationInputError} when the length is not m·n or a value is not finite
   */
  pushRows(rows: ArrayLike<number>, m: number): this {
    checkRowBlock(rows, m, this.n);
    for (let r = 0; r < m; r++) this.pushAt(rows, r * this.n, r);
    return this;
  }

  private pushAt(source: ArrayLike<number>, offset: number, row: number): void {
    let sq = 0;
    for (let i = 0; i < this.n; i++) {
      const v = source[offset + i];
      if (!Number.isFinite(v)) {
        const field = row < 0 ? `x[${i}]` : `rows[${offset + i}] (row ${row}, column ${i})`;
        throw new EstimationInputError(field, "must be a finite number", "a finite number", v);
      }
      const d = v - this.mean[i];
      sq += d * d;
    }
    this.sum += sq * sq;
    this.count++;
  }

  /**
   * Adds another shard's sum. Both must be centred on the same mean, or the sums do not add up.
   * @throws {EstimationInputError} when the column counts or the means differ
   */
  merge(o: FourthMomentAccumulator): this {
    if (o.n !== this.n) throw new EstimationInputError("o.n", "must equal this accumulator's column count", this.n, o.n);
    for (let i = 0; i < this.n; i++) {
      if (o.mean[i] !== this.mean[i]) {
        throw new EstimationInputError(`o.mean[${i}]`, "must equal this accumulator's centre: Σ‖x−μ‖⁴ around different centres do not add", this.mean[i], o.mean[i]);
      }
    }
    this.count += o.count;
    this.sum += o.sum;
    return this;
  }
}

/**
 * Ledoit–Wolf (2004) shrinkage toward (tr S / n)·I, with S the covariance divided by m and the
 * intensity computed as scikit-learn's `ledoit_wolf_shrinkage` does (see the module comment).
 * With one column the target equals S, so the intensity is 0 (as scikit-learn returns).
 *
 * @param acc the first pass (count, mean, co-moment)
 * @param sumFourthPowerOfDeviations Σ_k ‖x_k − x̄‖⁴ over the same rows, x̄ = acc.mean
 * @throws {EstimationInputError} when there are no rows, or the fourth-moment sum is negative,
 *   non-finite, or smaller than the bound m·(tr S)² that any data with this covariance satisfies
 *   (Cauchy–Schwarz) — the sign of a sum from another data set or another centre
 * @example shrinkageEstimate(acc, fourth.sum).details // { estimator: "shrinkage", shrinkage: 0.09, … }
 */
export function shrinkageEstimate(acc: MomentAccumulator, sumFourthPowerOfDeviations: number): CovarianceEstimate {
  requireRows(acc);
  const sum4 = sumFourthPowerOfDeviations;
  if (!Number.isFinite(sum4) || sum4 < 0) {
    throw new EstimationInputError("sumFourthPowerOfDeviations", "must be a finite number ≥ 0", "a finite number ≥ 0", sum4);
  }
  const m = acc.count;
  const n = acc.n;
  const s = acc.covariance("m");
  let trace = 0;
  for (let i = 0; i < n; i++) trace += s[i * n + i];
  const mu = trace / n;
  // (Σ‖x̃‖²)² ≤ m·Σ‖x̃‖⁴ and Σ‖x̃‖² = m·tr S, so Σ‖x̃‖⁴ ≥ m·(tr S)²; the slack absorbs round-off.
  const bound = m * trace * trace;
  if (sum4 < bound * (1 - 1e-8)) {
    throw new EstimationInputError(
      "sumFourthPowerOfDeviations",
      "must be ≥ m·(tr S)² for these moments (was it accumulated over other rows or around another mean?)",
      `≥ ${bound}`,
      sum4,
    );
  }
  let normS2 = 0;
  let dispersion = 0; // δ̄² = ‖S − μI‖²_F, summed directly rather than expanded to avoid cancellation
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < n; j++) {
      const v = s[i * n + j];
      normS2 += v * v;
      const d = i === j ? v - mu : v;
      dispersion += d * d;
    }
  }
  let shrinkage = 0;
  if (n > 1) {
    // β̄² ≥ 0 in exact arithmetic; round-off can push it a hair below, which means "no noise".
    const noise = Math.min((sum4 / m - normS2) / m, dispersion);
    shrinkage = noise > 0 ? noise / dispersion : 0;
  }
  const covariance = new Float64Array(n * n);
  for (let k = 0; k < n * n; k++) covariance[k] = (1 - shrinkage) * s[k];
  for (let i = 0; i < n; i++) covariance[i * n + i] += shrinkage * mu;
  return {
    mean: Float64Array.from(acc.mean),
    covariance,
    n,
    rows: m,
    details: { estimator: "shrinkage", denominator: "m", shrinkage, target: "scaled-identity" },
  };
}

/**
 * {@link shrinkageEstimate} from the two passes' accumulators, checking that they saw the same rows
 * (same count) around the same mean (to 1e-9 of each column's scale).
 * @throws {EstimationInputError} when the passes disagree
 * @example shrinkageEstimateFromPasses(firstPass, secondPass)
 */
export function shrinkageEstimateFromPasses(acc: MomentAccumulator, fourth: FourthMomentAccumulator): CovarianceEstimate {
  if (fourth.n !== acc.n) throw new EstimationInputError("fourth.n", "must equal the first pass's column count", acc.n, fourth.n);
  if (fourth.count !== acc.count) {
    throw new EstimationInputError("fourth.count", "must equal the first pass's row count (both passes read the same rows)", acc.count, fourth.count);
  }
  for (let i = 0; i < acc.n; i++) {
    const sd = acc.count > 0 ? Math.sqrt(acc.comoment[i * acc.n + i] / acc.count) : 0;
    const scale = Math.abs(acc.mean[i]) + sd;
    if (Math.abs(fourth.mean[i] - acc.mean[i]) > 1e-9 * scale) {
      throw new EstimationInputError(`fourth.mean[${i}]`, "must be the first pass's final mean", acc.mean[i], fourth.mean[i]);
    }
  }
  return shrinkageEstimate(acc, fourth.sum);
}

/**
 * Ledoit–Wolf estimate of in-memory rows: both passes over `rows` (m×n row-major).
 * @throws {EstimationInputError} when m, n or the length of `rows` are inconsistent, or a value is not finite
 * @example ledoitWolfFromRows(Float64Array.of(1, 2, 3, 5, 4, 4), 3, 2)
 */
export function ledoitWolfFromRows(rows: Float64Array, m: number, n: number): CovarianceEstimate {
  if (!Number.isInteger(m) || m < 1) throw new EstimationInputError("m", "must be an integer ≥ 1 (the number of rows)", "an integer ≥ 1", m);
  if (!Number.isInteger(n) || n < 1) throw new EstimationInputError("n", "must be an integer ≥ 1 (the number of columns)", "an integer ≥ 1", n);
  const acc = new MomentAccumulator(n).pushRows(rows, m);
  const fourth = new FourthMomentAccumulator(acc.mean).pushRows(rows, m);
  return shrinkageEstimate(acc, fourth.sum);
}

/**
 * The independent-feature model: the same estimate with every off-diagonal covariance set to 0
 * (variances, mean, rows and details unchanged). Returns new arrays; the input is not modified.
 * @throws {EstimationInputError} when the covariance is not n×n
 * @example toDiagonal(classicalEstimate(acc)).covariance // diag(variances ÷ m)
 */
export function toDiagonal(est: CovarianceEstimate): CovarianceEstimate {
  const n = est.n;
  if (est.covariance.length !== n * n) {
    throw new EstimationInputError("est.covariance", `must be n × n = ${n} × ${n}`, n * n, est.covariance.length);
  }
  const covariance = new Float64Array(n * n);
  for (let i = 0; i < n; i++) covariance[i * n + i] = est.covariance[i * n + i];
  return { mean: Float64Array.from(est.mean), covariance, n, rows: est.rows, details: { ...est.details } };
}

/** Rows per column below which `auto` picks the diagonal shape (rule of thumb; common practice). */
export const FULL_COVARIANCE_ROWS_PER_COLUMN = 10;

/**
 * Picks the covariance shape. `auto` → full iff rows ≥ 10·n (common practice), otherwise diagonal;
 * an explicit `full` or `diagonal` is honoured. The reason is a sentence with the numbers.
 * @throws {EstimationInputError} on an unknown request, a negative/non-integer row count or n < 1
 * @example chooseShape("auto", 48000, 12) // { shape: "full", reason: "auto chose full: 48,000 rows ≥ 10 × 12 columns" }
 */
export function chooseShape(request: CovarianceShapeRequest, rows: number, n: number): { shape: CovarianceShape; reason: string } {
  if (request !== "auto" && request !== "full" && request !== "diagonal") {
    throw new EstimationInputError("request", 'must be "auto", "full" or "diagonal"', '"auto", "full" or "diagonal"', request);
  }
  if (!Number.isInteger(rows) || rows < 0) throw new EstimationInputError("rows", "must be an integer ≥ 0", "an integer ≥ 0", rows);
  if (!Number.isInteger(n) || n < 1) throw new EstimationInputError("n", "must be an integer ≥ 1 (the number of model columns)", "an integer ≥ 1", n);
  const k = FULL_COVARIANCE_ROWS_PER_COLUMN;
  const rowText = countOf(rows, "row");
  const colText = countOf(n, "column");
  if (request === "auto") {
    if (rows >= k * n) return { shape: "full", reason: `auto chose full: ${rowText} ≥ ${k} × ${colText}` };
    return {
      shape: "diagonal",
      reason: `auto chose diagonal: ${rowText} < ${k} × ${colText} (${formatCount(k * n)} rows needed for full)`,
    };
  }
  return { shape: request, reason: `${request} as requested (--covariance ${request}): ${rowText} for ${colText}` };
}
